"""app.analysis.assignment: scipy's optimal assignment, loaded without scipy.optimize.

The reference is scipy itself: the function must be the very object that
``scipy.optimize.linear_sum_assignment`` names, so its results are scipy's by construction.
"""

from __future__ import annotations

import importlib.machinery
import subprocess
import sys

import numpy as np
import scipy.optimize

from app.analysis import assignment


def test_it_is_scipys_own_function():
    """Loaded alone and registered under its own name, the module is the one that
    ``scipy.optimize`` then imports: one function, scipy's (whatever was imported first)."""
    assert assignment.linear_sum_assignment is scipy.optimize.linear_sum_assignment
    cost = np.random.default_rng(0).random((5, 7))
    for maximize in (False, True):
        rows, cols = assignment.linear_sum_assignment(cost, maximize=maximize)
        ref_rows, ref_cols = scipy.optimize.linear_sum_assignment(cost, maximize=maximize)
        assert rows.tolist() == ref_rows.tolist() and cols.tolist() == ref_cols.tolist()


def test_grouping_does_not_import_scipy_optimize():
    """What a batch command and its fork server import to group people stays clear of
    ``scipy.optimize`` (0.3 s of CPU in each process, see the module's docstring)."""
    code = ("import sys, app.analysis.association, app.jobs_analysis; "
            "print('scipy.optimize' in sys.modules, 'scipy.optimize._lsap' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.split() == ["False", "True"]


def test_without_the_file_it_imports_scipy_optimize(monkeypatch):
    """Another layout of scipy (no such file beside scipy.optimize): the usual import."""
    monkeypatch.delitem(sys.modules, assignment._MODULE)
    monkeypatch.setattr(importlib.machinery, "EXTENSION_SUFFIXES", [".not-there"])
    assert assignment._load() is scipy.optimize.linear_sum_assignment
