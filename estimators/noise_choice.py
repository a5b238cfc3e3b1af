"""Which noise model a fit uses: the ``noise`` argument, the diagnosis, and the caution that reports them.

``noise="auto"`` tests the readings for serial correlation in ``x`` order
(:func:`estimators.serial.diagnose_noise`) and treats the noise as correlated
when the test rejects independence; ``"independent"`` and ``"correlated"``
decide without the test, but the diagnosis is still made so that its lag-1
estimate can be reported. Method notes: ``docs/correlated-noise.md``.

References
----------
.. [1] Hall, P. and Van Keilegom, I. (2003). Using difference-based methods
   for inference in nonparametric regression with time series errors.
   *J. R. Statist. Soc. B* 65, 443-456.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from .cautions import Caution
from .names import NOISE_CHOICES
from .sample import SortedSample
from .serial import NoiseDiagnosis, correlated_se_factor, diagnose_noise

__all__ = ["NoiseChoice", "check_noise", "choose_noise"]


@dataclass(frozen=True)
class NoiseChoice:
    """The noise model used and the diagnosis behind it.

    Attributes
    ----------
    requested : str
        The ``noise`` argument: ``"auto"``, ``"independent"`` or ``"correlated"``.
    used : str
        ``"independent"`` or ``"correlated"``.
    diagnosis : NoiseDiagnosis
        Lag-1 autocorrelation, test statistic, p-value and AR(1) variances.
    """

    requested: str
    used: str
    diagnosis: NoiseDiagnosis

    @property
    def correlated(self) -> bool:
        """True when the correlated-noise path is used."""
        return self.used == "correlated"

    @property
    def autocorrelation(self) -> float:
        """Lag-1 autocorrelation estimate of the noise in ``x`` order (NaN with fewer than 8 distinct ``x``)."""
        return self.diagnosis.autocorrelation

    def se_factor(self, residual_scale: float) -> float:
        """Factor on an independent-noise standard error; 1 on the independent path.

        ``sqrt(long-run variance) / residual_scale`` on the correlated path
        (:func:`estimators.serial.correlated_se_factor`).
        """
        if not self.correlated:
            return 1.0
        factor = correlated_se_factor(self.diagnosis, residual_scale)
        return factor if math.isfinite(factor) else 1.0

    def cautions(self) -> list[Caution]:
        """``correlated_noise`` when the correlated path is used, or when it was asked for but cannot be."""
        d = self.diagnosis
        if self.correlated and self.requested == "auto":
            return [d.caution()]
        if self.correlated:
            return [
                Caution(
                    "correlated_noise",
                    f"the noise is treated as correlated, as requested (lag-1 autocorrelation estimate "
                    f"{d.autocorrelation:.2f}, p = {d.p_value:.2g} for independence); bandwidth and bands allow for it",
                )
            ]
        if self.requested == "correlated":
            return [
                Caution(
                    "correlated_noise",
                    f"only {d.length} distinct x values: too few to estimate the correlation of the noise, "
                    "so it is treated as independent",
                )
            ]
        return []


def check_noise(noise: Any) -> str:
    """Validate the ``noise`` argument; a clear message names the allowed values."""
    if not isinstance(noise, str) or noise not in NOISE_CHOICES:
        raise ValueError(f"noise must be one of {', '.join(NOISE_CHOICES)}, got {noise!r}")
    return noise


def choose_noise(sample: SortedSample, noise: str) -> NoiseChoice:
    """Diagnose the noise of a validated sample and decide the path (``noise`` already checked).

    ``O(n)``: one pass over the sorted readings (tie groups averaged, zero
    weights left out). With fewer than 8 distinct ``x`` values the correlation
    cannot be estimated and the independent path is used.
    """
    diagnosis = diagnose_noise(sample.xs, sample.ys, sample.ws)
    estimable = math.isfinite(diagnosis.autocorrelation) and math.isfinite(diagnosis.long_run_variance)
    if noise == "correlated":
        used = "correlated" if estimable else "independent"
    elif noise == "auto":
        used = "correlated" if (estimable and diagnosis.correlated) else "independent"
    else:
        used = "independent"
    return NoiseChoice(noise, used, diagnosis)
