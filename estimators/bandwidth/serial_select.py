"""Bandwidth selection when the noise is serially correlated: modified (leave-(2l+1)-out) cross-validation.

The candidates are those the default selector would score (same grid rules);
each is scored by :func:`estimators.serial.correlated_scores` with the
``leave_out`` criterion, and the rule (``min`` or ``one_se``, the latter with
the scores' block standard errors) picks one. Method notes:
``docs/correlated-noise.md``.

References
----------
.. [1] Chu, C.-K. and Marron, J. S. (1991). Comparison of two bandwidth
   selectors with dependent errors. *Ann. Statist.* 19, 1906-1918.
.. [2] Hart, J. D. (1991). Kernel regression estimation with time series
   errors. *J. R. Statist. Soc. B* 53, 173-187.
"""

from __future__ import annotations

import numpy as np

from ..cautions import Caution
from ..kernels import Kernel, convert_bandwidth
from ..names import CORRELATED_SELECTOR
from ..sample import SortedSample
from ..serial import AGGREGATE_READINGS, NoiseDiagnosis, correlated_scores
from .cautions import edge_caution, unscored_caution
from .grid import candidate_grid
from .record import Selection

__all__ = ["select_correlated"]

#: the criterion of :func:`estimators.serial.correlated_scores` behind :data:`CORRELATED_SELECTOR`
CRITERION = "leave_out"


def select_correlated(
    sample: SortedSample,
    kernel: Kernel,
    degree: int,
    diagnosis: NoiseDiagnosis,
    *,
    rule: str = "min",
    candidates: int = 40,
    bandwidth_min: float | None = None,
    bandwidth_max: float | None = None,
    floor: float = 0.0,
) -> Selection:
    """Choose a bandwidth by modified cross-validation for the diagnosed correlation.

    Parameters
    ----------
    sample : SortedSample
        Validated, sorted data.
    kernel : Kernel
    degree : {0, 1, 2}
    diagnosis : NoiseDiagnosis
        Supplies the lag-1 autocorrelation that sets the exclusion ``l``.
    rule : {"min", "one_se"}
    candidates, bandwidth_min, bandwidth_max
        As for :func:`estimators.select_bandwidth`.
    floor : float
        Smallest default candidate (the binned floor when the independent-noise
        selector would bin), so that both paths score the same default grid.

    Returns
    -------
    Selection
        ``selector`` is :data:`estimators.names.CORRELATED_SELECTOR`; every
        candidate keeps its score (NaN where undefined: the smallest candidates
        can leave too few readings in a window once ``2l + 1`` are left out,
        which draws no caution; when none can be scored the largest candidate
        is chosen with an ``unscored_candidates`` caution); ``pilot`` holds the
        noise estimates and the exclusion ``l``.
    """
    grid, cautions = candidate_grid(sample, kernel, degree, candidates, bandwidth_min, bandwidth_max, floor=floor)
    raised = bandwidth_min is None and grid[0] == floor
    scored = correlated_scores(
        sample.xs, sample.ys, grid, diagnosis, kernel=kernel, degree=degree, weights=sample.ws,
        criterion=CRITERION, rule=rule, fallback_largest=True,
    )
    chosen_i = int(np.flatnonzero(grid == scored.chosen)[0])
    edge = edge_caution(scored.best, grid, "best-scoring bandwidth", raised)
    if edge is None and chosen_i != scored.best:
        edge = edge_caution(chosen_i, grid, "bandwidth chosen by one_se", raised)
    # the smallest candidates may leave too few readings in a window once 2l + 1 are left out: expected, no caution
    finite = np.flatnonzero(np.isfinite(scored.scores))
    if finite.size:
        extra: list[Caution | None] = [edge, unscored_caution(CORRELATED_SELECTOR, scored.scores[finite[0]:])]
    else:
        extra = [
            Caution(
                "unscored_candidates",
                f"no candidate could be scored by {CORRELATED_SELECTOR}: leaving out the {2 * scored.exclusion + 1} "
                "readings around each reading leaves too few to predict it from (the correlation reaches over much "
                f"of the series), so the largest candidate ({grid[-1]:.4g}) is used; consider a fixed bandwidth",
            )
        ]
    cautions.extend(c for c in extra if c is not None)
    pilot = {
        "noise_autocorrelation": float(diagnosis.autocorrelation),
        "marginal_variance": float(diagnosis.marginal_variance),
        "long_run_variance": float(diagnosis.long_run_variance),
        "exclusion": float(scored.exclusion),
    }
    return Selection(
        CORRELATED_SELECTOR, rule, grid, scored.scores, scored.chosen,
        convert_bandwidth(scored.chosen, kernel.name, "gaussian"), cautions, scored.effective_df,
        float(scored.score_se[scored.best]), "exact" if sample.xs.size <= AGGREGATE_READINGS else "binned", pilot,
    )
