"""Kernel registry and kernel constants (``R(K)``, ``mu2``, efficiency, canonical factor) and exact shapes.

Kernels are symmetric densities on ``[-1, 1]`` (gaussian: the real line) in their textbook scaling.
References: ``docs/methods.md`` (kernels).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import cached_property, lru_cache

import numpy as np
from numpy.polynomial import polynomial as npoly

__all__ = ["Kernel", "KERNELS", "Shape", "convert_bandwidth", "get_kernel"]


@dataclass(frozen=True)
class Shape:
    """Exact form of ``K(u)`` on ``|u| <= 1`` as a sum of simple terms.

    ``K(u) = sum_a poly[a] * t**a + sum_j amp_j * cos(omega_j * u)`` with
    ``t = |u|`` when ``in_abs`` is true and ``t = u`` otherwise.
    """

    poly: tuple[float, ...] = ()
    in_abs: bool = False
    cosines: tuple[tuple[float, float], ...] = ()  # (amplitude, angular frequency)

    def squared(self) -> Shape:
        """The shape of ``K(u)**2`` (used for variances; computed once per shape)."""
        return _squared(self)


@lru_cache(maxsize=64)
def _squared(shape: Shape) -> Shape:
    if shape.cosines and shape.poly:
        raise NotImplementedError("mixed polynomial and cosine shapes are not squared")
    if shape.cosines:
        # (a cos(w u))^2 = a^2/2 + a^2/2 cos(2 w u)
        ((amp, omega),) = shape.cosines
        return Shape(poly=(amp * amp / 2.0,), cosines=((amp * amp / 2.0, 2.0 * omega),))
    sq = npoly.polymul(np.array(shape.poly), np.array(shape.poly))
    return Shape(poly=tuple(float(c) for c in sq), in_abs=shape.in_abs)


@dataclass(frozen=True)
class Kernel:
    """A smoothing kernel with its constants.

    Attributes
    ----------
    name : str
        Registry key.
    function : callable
        ``K(u)`` evaluated elementwise on an array.
    support : float
        Half-width of the support, ``1.0`` for ``[-1, 1]``; ``inf`` for the
        gaussian.
    roughness : float
        ``R(K) = integral of K(u)**2 du``.
    second_moment : float
        ``mu2(K) = integral of u**2 K(u) du``.
    shape : Shape or None
        Exact polynomial / cosine form on the support (``None`` for gaussian).
    """

    name: str
    function: Callable[[np.ndarray], np.ndarray] = field(repr=False)
    support: float
    roughness: float
    second_moment: float
    shape: Shape | None = field(default=None, repr=False)

    def __call__(self, u: np.ndarray | float) -> np.ndarray:
        return self.function(np.asarray(u, dtype=float))

    @cached_property
    def vanishes_at_edge(self) -> bool:
        """True when ``K(+-1) == 0`` so points exactly on the edge carry no weight."""
        return bool(np.isfinite(self.support) and float(self.function(np.array([1.0]))[0]) == 0.0)

    @cached_property
    def at_zero(self) -> float:
        """``K(0)``, the weight of a point in its own window (leverages)."""
        return float(self.function(np.array([0.0]))[0])

    @property
    def efficiency(self) -> float:
        """AMISE efficiency relative to the Epanechnikov kernel (Wand & Jones 1995, 2.7).

        ``eff(K) = sqrt(mu2(K_E)) R(K_E) / (sqrt(mu2(K)) R(K))``.
        """
        return (math.sqrt(0.2) * 0.6) / (math.sqrt(self.second_moment) * self.roughness)

    @property
    def canonical_factor(self) -> float:
        """Canonical bandwidth factor ``delta_0 = (R(K) / mu2(K)**2) ** (1/5)`` (Marron & Nolan 1988).

        Bandwidths ``h_1 / delta_0(K_1) = h_2 / delta_0(K_2)`` give the same
        amount of smoothing to first order.
        """
        return float((self.roughness / self.second_moment**2) ** 0.2)


def _compact(expr: Callable[[np.ndarray], np.ndarray]) -> Callable[[np.ndarray], np.ndarray]:
    def k(u: np.ndarray) -> np.ndarray:
        u = np.asarray(u, dtype=float)
        return np.where(np.abs(u) <= 1.0, expr(np.clip(u, -1.0, 1.0)), 0.0)

    return k


_SQRT_2PI = math.sqrt(2.0 * math.pi)

KERNELS: dict[str, Kernel] = {
    "gaussian": Kernel(
        "gaussian",
        lambda u: np.exp(-0.5 * np.asarray(u, dtype=float) ** 2) / _SQRT_2PI,
        math.inf,
        1.0 / (2.0 * math.sqrt(math.pi)),
        1.0,
    ),
    "epanechnikov": Kernel(
        "epanechnikov",
        _compact(lambda u: 0.75 * (1.0 - u * u)),
        1.0,
        3.0 / 5.0,
        1.0 / 5.0,
        Shape(poly=(0.75, 0.0, -0.75)),
    ),
    "uniform": Kernel(
        "uniform",
        _compact(lambda u: np.full_like(u, 0.5)),
        1.0,
        1.0 / 2.0,
        1.0 / 3.0,
        Shape(poly=(0.5,)),
    ),
    "triangular": Kernel(
        "triangular",
        _compact(lambda u: 1.0 - np.abs(u)),
        1.0,
        2.0 / 3.0,
        1.0 / 6.0,
        Shape(poly=(1.0, -1.0), in_abs=True),
    ),
    "biweight": Kernel(
        "biweight",
        _compact(lambda u: (15.0 / 16.0) * (1.0 - u * u) ** 2),
        1.0,
        5.0 / 7.0,
        1.0 / 7.0,
        Shape(poly=tuple(15.0 / 16.0 * c for c in (1.0, 0.0, -2.0, 0.0, 1.0))),
    ),
    "triweight": Kernel(
        "triweight",
        _compact(lambda u: (35.0 / 32.0) * (1.0 - u * u) ** 3),
        1.0,
        350.0 / 429.0,
        1.0 / 9.0,
        Shape(poly=tuple(35.0 / 32.0 * c for c in (1.0, 0.0, -3.0, 0.0, 3.0, 0.0, -1.0))),
    ),
    "tricube": Kernel(
        "tricube",
        _compact(lambda u: (70.0 / 81.0) * (1.0 - np.abs(u) ** 3) ** 3),
        1.0,
        175.0 / 247.0,
        35.0 / 243.0,
        Shape(
            poly=tuple(70.0 / 81.0 * c for c in (1.0, 0, 0, -3.0, 0, 0, 3.0, 0, 0, -1.0)),
            in_abs=True,
        ),
    ),
    "cosine": Kernel(
        "cosine",
        _compact(lambda u: (math.pi / 4.0) * np.cos(0.5 * math.pi * u)),
        1.0,
        math.pi**2 / 16.0,
        1.0 - 8.0 / math.pi**2,
        Shape(cosines=((math.pi / 4.0, math.pi / 2.0),)),
    ),
}


def get_kernel(name: str) -> Kernel:
    """Look a kernel up by name, with an error that lists the valid names."""
    try:
        return KERNELS[name]
    except (KeyError, TypeError):
        raise ValueError(f"unknown kernel {name!r}; choose one of {', '.join(KERNELS)}") from None


def convert_bandwidth(bandwidth: float, from_kernel: str, to_kernel: str) -> float:
    """Carry a bandwidth from one kernel to another at equal smoothness.

    Uses canonical scaling (Marron & Nolan 1988):
    ``h_to = h_from * delta_0(to) / delta_0(from)``.
    """
    return float(bandwidth) * get_kernel(to_kernel).canonical_factor / get_kernel(from_kernel).canonical_factor
