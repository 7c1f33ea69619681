"""The memo of line integrals gives what :func:`app.analysis.association.limb_scores` gives,
to the last bit (the reference is the project's own vectorised ``E`` after Cao et al., CVPR
2017, Eq. 10-11; fields and segments are synthetic, random)."""

from types import SimpleNamespace

import numpy as np
import pytest

from app.analysis.association import limb_scores
from app.analysis.triage.model_evidence import FieldMemo


@pytest.mark.parametrize("dtype", [np.float16, np.float32, np.float64])
@pytest.mark.parametrize("shape, stride", [((23, 30), 8), ((1, 5), 4), ((6, 1), 1)])
def test_memo_equals_limb_scores_bit_for_bit(dtype, shape, stride):
    rng = np.random.default_rng(7)
    pafs = rng.normal(size=(1, 2, *shape)).astype(dtype)
    memo = FieldMemo(SimpleNamespace(pafs=pafs, stride=stride))
    span = max(shape) * stride
    points = rng.uniform(-20, span + 20, size=(300, 4))
    points[::25, 2:] = points[::25, :2]          # zero-length segments
    points[1::9] = np.round(points[1::9])        # on cell centres and edges
    for ax, ay, bx, by in points:
        start, end = np.array([ax, ay]), np.array([bx, by])
        want, _ = limb_scores(pafs[0], start[None], end[None], stride)
        assert memo.e(0, start, end) == float(want[0, 0])

