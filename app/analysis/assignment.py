"""scipy's optimal assignment (``scipy.optimize.linear_sum_assignment``) without importing all
of ``scipy.optimize``.

Importing ``scipy.optimize`` takes 0.3 s of CPU (it brings in its linear programming, sparse
algebra and FFT modules), which every batch command that groups people paid twice: once in
its own process and once in its workers' fork server (:mod:`app.parallel`), before either
could group a frame. The assignment itself lives in one compiled module of its own,
``scipy/optimize/_lsap``, which needs nothing of the rest: loading it alone takes 0.015 s
(3 December 2026). :data:`linear_sum_assignment` is that module's function, the very object
``scipy.optimize`` exports (``tests/analysis/test_assignment.py`` checks it is the same one);
where the file is not found (another layout of scipy, a frozen build) it is imported the
usual way.
"""

from __future__ import annotations

import importlib.machinery
import importlib.util
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

__all__ = ["linear_sum_assignment"]

#: The compiled module's name inside scipy, which its file's init function is named after.
_MODULE = "scipy.optimize._lsap"


def _load() -> Callable[..., Any]:
    """The assignment function: from ``scipy/optimize/_lsap`` loaded alone (registered under
    its own name, so a later ``import scipy.optimize`` reuses it rather than loading the
    file twice), else from ``scipy.optimize``."""
    loaded = sys.modules.get(_MODULE)
    if loaded is not None:
        return loaded.linear_sum_assignment
    try:
        import scipy

        folder = Path(scipy.__file__).parent / "optimize"
        for suffix in importlib.machinery.EXTENSION_SUFFIXES:
            path = folder / f"_lsap{suffix}"
            if not path.is_file():
                continue
            loader = importlib.machinery.ExtensionFileLoader(_MODULE, str(path))
            spec = importlib.util.spec_from_file_location(_MODULE, path, loader=loader)
            if spec is None:
                break
            module = importlib.util.module_from_spec(spec)
            loader.exec_module(module)
            sys.modules[_MODULE] = module
            return module.linear_sum_assignment
    except Exception:  # any surprise: the usual import below
        sys.modules.pop(_MODULE, None)
    from scipy.optimize import linear_sum_assignment as usual

    return usual


#: ``linear_sum_assignment(cost, maximize=False) -> (rows, cols)``, scipy's (see the module's
#: docstring).
linear_sum_assignment = _load()
