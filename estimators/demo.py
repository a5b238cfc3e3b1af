"""Deterministic demo data for the invented Harbour Street scenario.

Two series, both generated from a seed with a :class:`numpy.random.Generator`:

* ``cold_store``: a refrigerated warehouse logs compressor power draw (kW)
  every 15 minutes against outdoor temperature (°C) for three weeks.  The power
  rises smoothly with temperature; there is Gaussian noise, a few defrost-cycle
  spikes (outliers) and an 18-hour logger outage during the warmest spell, so
  the hottest temperatures are thinly covered.
* ``parcel_depot``: a parcel depot logs hourly parcel counts for four weeks
  with epoch-millisecond timestamps as ``x``.  The counts follow a smooth daily
  and weekly pattern with a slow upward trend and Poisson noise, a few hours
  with a jammed sorter (outliers near zero) and a 30-hour scanner outage.

All names and numbers are made up.  The module does no I/O and uses numpy only.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

__all__ = ["DemoSeries", "cold_store", "parcel_depot", "DEMOS"]

_MS_PER_HOUR = 3_600_000
_START_MS = 1_748_822_400_000  # Monday 2025-06-02 00:00 UTC, in epoch milliseconds


@dataclass(frozen=True)
class DemoSeries:
    """One demo series: data plus the labels a chart needs.

    Attributes
    ----------
    name : str
        Identifier used in URLs, e.g. ``"cold_store"``.
    title : str
        Human-readable title.
    x, y : ndarray
        The data, in logging order (``x`` is not necessarily sorted).
    x_label, y_label : str
        Axis labels without units.
    x_unit, y_unit : str
        Units of ``x`` and ``y``.
    description : str
        What the series shows and which quirks it contains.
    """

    name: str
    title: str
    x: np.ndarray
    y: np.ndarray
    x_label: str
    y_label: str
    x_unit: str
    y_unit: str
    description: str


def _compressor_power(temperature: np.ndarray) -> np.ndarray:
    """Smooth true compressor power (kW) as a function of outdoor temperature (°C)."""
    return 24.0 + 0.45 * temperature + 16.0 / (1.0 + np.exp(-(temperature - 19.0) / 3.5))


def cold_store(seed: int = 0) -> DemoSeries:
    """Compressor power (kW) against outdoor temperature (°C), every 15 minutes.

    Parameters
    ----------
    seed : int, default 0
        Seed of the random generator; the same seed gives the same data.

    Returns
    -------
    DemoSeries
        About 1,940 points over three weeks.
    """
    rng = np.random.default_rng(seed)
    steps_per_day = 96
    n_steps = 21 * steps_per_day
    hours = np.arange(n_steps) * 0.25
    # Weather: a slow random walk (fronts passing) plus a warm spell in week two.
    drift = np.cumsum(rng.normal(0.0, 0.12, n_steps))
    drift -= np.linspace(drift[0], drift[-1], n_steps)  # pin both ends near the mean
    warm_spell = 7.0 * np.exp(-0.5 * ((hours - 250.0) / 30.0) ** 2)
    daily = 5.5 * np.sin(2.0 * np.pi * (hours - 9.0) / 24.0)
    temperature = 15.0 + daily + drift + warm_spell + rng.normal(0.0, 0.3, n_steps)
    power = _compressor_power(temperature) + rng.normal(0.0, 1.2, n_steps)
    # Defrost cycles: short spikes well above the curve.
    spikes = rng.choice(n_steps, size=6, replace=False)
    power[spikes] += rng.uniform(12.0, 18.0, size=6)
    # Logger outage during the warmest afternoon of the warm spell.
    keep = ~((hours >= 243.0) & (hours < 261.0))
    return DemoSeries(
        name="cold_store",
        title="Harbour Street cold store: compressor power vs outdoor temperature",
        x=np.round(temperature[keep], 2),
        y=np.round(power[keep], 2),
        x_label="Outdoor temperature",
        y_label="Compressor power",
        x_unit="°C",
        y_unit="kW",
        description=(
            "Readings every 15 minutes over three weeks. Power rises with outdoor temperature, "
            "more steeply above about 19 °C. Six defrost cycles show as spikes well above the "
            "curve, and an 18-hour logger outage during the warmest afternoon leaves the hottest "
            "temperatures thinly covered."
        ),
    )


def _parcel_rate(hour_of_week: np.ndarray, day_index: np.ndarray) -> np.ndarray:
    """Smooth true parcel rate (parcels per hour)."""
    hour_of_day = hour_of_week % 24.0
    weekday = (hour_of_week // 24.0) < 5.0
    morning = np.exp(-0.5 * ((hour_of_day - 10.0) / 2.2) ** 2)
    afternoon = 0.8 * np.exp(-0.5 * ((hour_of_day - 16.0) / 2.0) ** 2)
    profile = 6.0 + 120.0 * (morning + afternoon)
    scale = np.where(weekday, 1.0, 0.45)
    trend = 1.0 + 0.01 * day_index
    return profile * scale * trend


def parcel_depot(seed: int = 0) -> DemoSeries:
    """Hourly parcel counts with epoch-millisecond timestamps as ``x``.

    Parameters
    ----------
    seed : int, default 0
        Seed of the random generator; the same seed gives the same data.

    Returns
    -------
    DemoSeries
        642 hourly counts over four weeks starting Monday 2025-06-02 00:00 UTC.
    """
    rng = np.random.default_rng(seed + 1)
    n_hours = 28 * 24
    hour = np.arange(n_hours, dtype=float)
    rate = _parcel_rate(hour % (7 * 24), hour // 24)
    counts = rng.poisson(rate).astype(float)
    # Sorter jams: a few busy hours where almost nothing was scanned.
    busy = np.flatnonzero(rate > 80.0)
    jams = rng.choice(busy, size=4, replace=False)
    counts[jams] = rng.integers(0, 4, size=4)
    # Scanner outage: 30 hours with no records at all.
    keep = ~((hour >= 400.0) & (hour < 430.0))
    timestamps = _START_MS + hour[keep] * _MS_PER_HOUR
    return DemoSeries(
        name="parcel_depot",
        title="Harbour Street parcel depot: parcels scanned per hour",
        x=timestamps,
        y=counts[keep],
        x_label="Time",
        y_label="Parcels scanned",
        x_unit="ms since 1970-01-01 UTC",
        y_unit="parcels per hour",
        description=(
            "Hourly counts over four weeks, timestamps in epoch milliseconds. Weekdays peak "
            "mid-morning and mid-afternoon, weekends are quieter, and volume grows slowly. Four "
            "busy hours with a jammed sorter show as counts near zero, and a 30-hour scanner "
            "outage leaves a gap. A bandwidth of a few hours (about 1e7 ms) follows the daily "
            "pattern; one of several days follows the trend."
        ),
    )


DEMOS: dict[str, Callable[..., DemoSeries]] = {
    "cold_store": cold_store,
    "parcel_depot": parcel_depot,
}
