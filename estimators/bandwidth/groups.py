"""The sources grouped by distinct ``x`` (tie groups), with the sums every score needs."""

from __future__ import annotations

import math

import numpy as np

from ..sample import SortedSample

#: standard errors and the turn count use at most this many evenly spaced tie groups
PROBE_GROUPS = 20000


class TieGroups:
    """The sources grouped by distinct ``x``, with the sums every score needs.

    ``W`` raw weight per group; ``Wt`` weight rescaled to mean 1 per point;
    ``ybar`` weighted group mean of ``y - y_centre``; ``wss`` within-group
    weighted sum of squares (rescaled weights), so that
    ``sum_{i in g} wt_i (y_i - f)^2 = wss_g + Wt_g (ybar_g - f)^2`` exactly.
    """

    def __init__(self, sample: SortedSample) -> None:
        xs, ws, yc = sample.xs, sample.ws, sample.yc
        new = np.empty(xs.size, dtype=bool)
        new[0] = True
        new[1:] = xs[1:] != xs[:-1]
        starts = np.flatnonzero(new)
        gid = np.cumsum(new) - 1
        self.x = xs[starts]
        self.scale = sample.n_used / float(np.sum(ws))
        self.W = np.add.reduceat(ws, starts)
        self.Wt = self.W * self.scale
        self.ybar = np.add.reduceat(ws * yc, starts) / self.W
        dev = yc - self.ybar[gid]
        self.wss = np.add.reduceat(ws * dev * dev, starts) * self.scale
        self.n = sample.n_used
        #: weighted standard deviation of y (for tolerances)
        self.y_scale = math.sqrt(float(np.sum(self.wss) + np.sum(self.Wt * self.ybar**2)) / self.n)
        #: evenly spaced groups on which standard errors and roughness are judged (all when few)
        self.probe = np.unique(np.linspace(0, self.x.size - 1, min(self.x.size, PROBE_GROUPS)).astype(np.int64))

    @property
    def count(self) -> int:
        return int(self.x.size)
