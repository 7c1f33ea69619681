"""Test configuration shared by the suite and the doctests in app/."""

import os

# Qt must never look for a display in tests; set before anything imports Qt.
os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
