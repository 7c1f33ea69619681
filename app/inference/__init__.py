"""Pre-labelling with a user's ONNX pose model on the CPU (OpenCV DNN).

- :mod:`app.inference.config`: the JSON config that says how to feed the model and read it.
- :mod:`app.inference.geometry`: frame -> network input, network output grid -> frame.
- :mod:`app.inference.network`: :class:`PoseNetwork`, the model run and mapped onto the skeleton.
- :mod:`app.inference.prelabel`: the job: maps, grouping, auto-labels, all or nothing.
"""

from app.inference.config import PrelabelConfig, default_config, load_config
from app.inference.network import PoseNetwork
from app.inference.prelabel import parse_frames, prelabel

__all__ = ["PoseNetwork", "PrelabelConfig", "default_config", "load_config", "parse_frames",
           "prelabel"]
