"""Errors pushed through the bootstrap's node machinery directly, for tests of the binned weights."""

from __future__ import annotations

import numpy as np

from estimators._compiled_bootstrap import accumulate_resampled
from estimators.local_poly import LocalPolynomial
from estimators.uncertainty.weights import WeightBlocks, make_nodes


def propagate(s: LocalPolynomial, t: np.ndarray, a: np.ndarray, errors: np.ndarray, engine: str) -> np.ndarray:
    """``sum_j l_j(t) errors[j, :]`` through the same node machinery as the bootstrap.

    ``t`` sorted; ``errors`` has one row per sorted source.
    """
    nodes = make_nodes(s, t, errors.shape[1], engine)
    blocks = WeightBlocks(s, t, a, nodes)
    ws = s.sample.ws[nodes.src]
    e = np.ascontiguousarray(errors[nodes.src])
    k = e.shape[1]
    pool = e.ravel()
    idx = np.arange(e.shape[0])[:, None] * k + np.arange(k)[None, :]
    g = np.zeros((nodes.x.size + 1, k))
    accumulate_resampled(
        idx, pool, np.ascontiguousarray(ws * (1.0 - nodes.frac)), np.ascontiguousarray(ws * nodes.frac),
        nodes.node, nodes.binned, g,
    )
    out = np.empty((t.size, k))
    blocks.apply(g, out)
    return out
