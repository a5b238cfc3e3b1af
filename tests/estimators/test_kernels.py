"""Kernel constants against handbook values and numerical integration."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from estimators import KERNELS
from estimators.kernels import convert_bandwidth, get_kernel


def _quad(f, kernel) -> float:  # type: ignore[no-untyped-def]
    lim = kernel.support if math.isfinite(kernel.support) else np.inf
    return integrate.quad(f, -lim, lim, limit=200)[0]


@pytest.mark.parametrize("name", list(KERNELS))
def test_integrates_to_one_and_constants_match_quadrature(name: str) -> None:
    """Each kernel is a density; R(K) and mu2(K) agree with scipy.integrate.quad."""
    k = KERNELS[name]
    f = lambda u: float(k(np.array([u]))[0])  # noqa: E731
    assert _quad(f, k) == pytest.approx(1.0, abs=1e-10)
    assert _quad(lambda u: f(u) ** 2, k) == pytest.approx(k.roughness, rel=1e-9)
    assert _quad(lambda u: u * u * f(u), k) == pytest.approx(k.second_moment, rel=1e-9)


# Silverman (1986), Table 3.1: efficiencies relative to Epanechnikov.
SILVERMAN_TABLE_3_1 = {
    "epanechnikov": 1.0,
    "biweight": math.sqrt(3087 / 3125),  # 0.9939
    "triangular": math.sqrt(243 / 250),  # 0.9859
    "gaussian": math.sqrt(36 * math.pi / 125),  # 0.9512
    "uniform": math.sqrt(108 / 125),  # 0.9295
}


@pytest.mark.parametrize("name", list(SILVERMAN_TABLE_3_1))
def test_efficiency_silverman_table_3_1(name: str) -> None:
    assert KERNELS[name].efficiency == pytest.approx(SILVERMAN_TABLE_3_1[name], abs=5e-5)


# Wand & Jones (1995), Section 2.7 (values from memory, 3-4 digits).
WAND_JONES_EFFICIENCY = {"triweight": 0.987, "tricube": 0.998, "cosine": 0.9995}


@pytest.mark.parametrize("name", list(WAND_JONES_EFFICIENCY))
def test_efficiency_wand_jones(name: str) -> None:
    assert KERNELS[name].efficiency == pytest.approx(WAND_JONES_EFFICIENCY[name], abs=6e-4)


# Marron & Nolan (1988), canonical bandwidths delta_0 (closed forms, from memory).
MARRON_NOLAN_DELTA0 = {
    "gaussian": (1 / (4 * math.pi)) ** 0.1,  # 0.7764
    "epanechnikov": 15**0.2,  # 1.7188
    "uniform": (9 / 2) ** 0.2,  # 1.3510
    "biweight": 35**0.2,  # 2.0362
    "triweight": (9450 / 143) ** 0.2,  # 2.3122
    "triangular": 24**0.2,  # 1.8882
}


@pytest.mark.parametrize("name", list(MARRON_NOLAN_DELTA0))
def test_canonical_factor_marron_nolan(name: str) -> None:
    assert KERNELS[name].canonical_factor == pytest.approx(MARRON_NOLAN_DELTA0[name], rel=1e-9)


def test_convert_bandwidth_roundtrip_and_direction() -> None:
    h = convert_bandwidth(1.0, "gaussian", "epanechnikov")
    assert h == pytest.approx(15**0.2 / (1 / (4 * math.pi)) ** 0.1)
    assert convert_bandwidth(h, "epanechnikov", "gaussian") == pytest.approx(1.0)


def test_unknown_kernel_message_lists_names() -> None:
    with pytest.raises(ValueError, match="epanechnikov"):
        get_kernel("parabolic")
