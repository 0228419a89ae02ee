"""Pareto fronts: non-dominated filtering of large point sets, and the hypervolume against a box."""

from __future__ import annotations

import numpy as np
from pymoo.indicators.hv import HV


def _dominated_by(A, B):
    """Boolean (len(A),): is each row of A dominated by some row of B (minimisation)?"""
    out = np.zeros(len(A), bool)
    for start in range(0, len(B), 512):
        b = B[start:start + 512]
        le = np.all(b[None, :, :] <= A[:, None, :], axis=2)
        lt = np.any(b[None, :, :] < A[:, None, :], axis=2)
        out |= np.any(le & lt, axis=1)
    return out


def nondominated(F, block=2048):
    """Indices of the non-dominated rows of F (minimisation), in increasing order.

    Points are taken in blocks in order of their normalised sum, so the front found early removes
    most later points with one vectorised comparison each: O(N x front size), no Python per point.
    Equal points do not dominate each other; both are kept.
    """
    F = np.asarray(F, dtype=float)
    if len(F) == 0:
        return np.empty(0, dtype=np.int64)
    span = np.ptp(F, axis=0)
    order = np.argsort(((F - F.min(axis=0)) / np.where(span > 0, span, 1.0)).sum(axis=1), kind="stable")
    front = np.empty(0, dtype=np.int64)
    for start in range(0, len(order), block):
        cand = order[start:start + block]
        if len(front):
            cand = cand[~_dominated_by(F[cand], F[front])]
        if len(cand) == 0:
            continue
        cand = cand[~_dominated_by(F[cand], F[cand])]
        if len(front):
            front = front[~_dominated_by(F[front], F[cand])]
        front = np.concatenate([front, cand])
    return np.sort(front)


def merge_front(F, front, new):
    """Indices of the non-dominated set of rows `front` (already non-dominated) and `new` of F.

    Equal to `nondominated` of the union, in O(len(new) x len(front)): a new point survives if no
    front point dominates it and no other survivor does; a front point leaves if a survivor
    dominates it (a new point dominated by the front cannot dominate a front point, by
    transitivity). Returned sorted.
    """
    F = np.asarray(F, dtype=float)
    new = np.asarray(new, dtype=np.int64)
    if len(new) and len(front):
        new = new[~_dominated_by(F[new], F[front])]
    if len(new):
        new = new[nondominated(F[new])]
        if len(front):
            front = front[~_dominated_by(F[front], F[new])]
    return np.sort(np.concatenate([np.asarray(front, dtype=np.int64), new]))


def hv_box(F, margin=0.1):
    """(ideal, reference) of a hypervolume box around F, widened by `margin` of each range."""
    lo, hi = F.min(axis=0), F.max(axis=0)
    span = np.where(hi > lo, hi - lo, np.maximum(np.abs(hi), 1.0))
    return lo - margin * span, hi + margin * span


def hypervolume(F, box):
    """Hypervolume of F normalised to the unit box `box = (ideal, reference)` (0 for no points)."""
    if len(F) == 0:
        return 0.0
    ideal, ref = box
    Z = (np.asarray(F) - ideal) / (ref - ideal)
    Z = Z[np.all(Z < 1.0, axis=1)]
    return float(HV(ref_point=np.ones(F.shape[1]))(Z)) if len(Z) else 0.0
