"""x values among the subnormal numbers are refused at validation, with a message, not a division by zero."""

from __future__ import annotations

import numpy as np
import pytest

from estimators import fit, select_bandwidth

# 5e-324 is the smallest positive subnormal double (IEEE 754 binary64: 2**-1074, about 4.94e-324)
SUBNORMAL_X = np.arange(12) * 5e-324
Y = np.arange(12.0) % 3


def test_selection_on_subnormal_x_is_refused_with_advice() -> None:
    with pytest.raises(ValueError, match="rescale x"):
        select_bandwidth(SUBNORMAL_X, Y)


def test_fit_on_subnormal_x_is_refused_with_advice() -> None:
    with pytest.raises(ValueError, match="rescale x"):
        fit(SUBNORMAL_X, Y, bandwidth=1e-323)


def test_tiny_but_normal_spans_still_work() -> None:
    x = np.arange(12) * 1e-200
    sel = select_bandwidth(x, Y)
    assert np.isfinite(sel.chosen) and 0.0 < sel.chosen
