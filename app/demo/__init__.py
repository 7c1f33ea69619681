"""The synthetic demo: a folk-dance rehearsal rendered procedurally, with true poses and maps.

``generate(out_dir)`` writes everything ``demo_project/`` holds (see :func:`generate`): 24
frames of one continuous phrase of a circle dance, the true poses as a COCO keypoints dataset
and one file of simulated network maps per frame. Everything is invented: no real people,
places or data.

Modules
-------
- :mod:`app.demo.poses`: the body model (segment lengths as fractions of stature), the dance
  step and the joined hands.
- :mod:`app.demo.camera`: the pinhole camera.
- :mod:`app.demo.render`: the hall and the shaded figures, with per-figure masks and depth.
- :mod:`app.demo.scene`: the cast, the true labels read from the render, and the files.
- :mod:`app.demo.maps`: simulated network output with a crowd's errors.
- :mod:`app.demo.evaluate`: which grouped people are wrong.

Calibration
-----------
The error rates of :mod:`app.demo.maps` were tuned so that grouping the shipped maps (seed
1966) with :func:`app.analysis.association.group_people` at its defaults, stride 8, gives
crowd errors at a realistic rate. Over the 24 frames (360 dancer appearances) it grouped 365
people, of whom 91 (25%) are wrong by :func:`app.demo.evaluate.wrong_people` (OKS below 0.8
to the matched true pose, or no match). Among the wrong ones (a person may show several
kinds; counted before invented spots were given confident peaks, which changed the totals
from 362 and 90): a hidden joint placed at an invented spot (50), a joint given to a neighbour (42),
joints left out (42), left and right swapped (12), a fragment of a person split in two (10),
a phantom (5), a person found twice (3); 30 dancer appearances had no grouped person within
OKS 0.5 (missed). Other seeds dance the same phrase with other casts and start angles and
overlap differently: seeds 1, 2 and 3 gave 49%, 45% and 35% wrong.
"""

from app.demo.scene import DEFAULT_SEED, generate

__all__ = ["DEFAULT_SEED", "generate"]
