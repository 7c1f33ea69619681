"""Posewright: correct multi-person 2D pose labels in crowded scenes.

The scripting surface is small and lives in a few modules:

- :mod:`app.model` -- skeletons, people, edit operations
- :mod:`app.store` -- :class:`app.store.Project`, the project on disk
- :mod:`app.formats` -- COCO keypoints JSON in and out, network maps, training targets
- :mod:`app.analysis` -- training targets, grouping, similarity, triage, owner suggestions
"""

__version__ = "0.1.0"
