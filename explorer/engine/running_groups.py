"""One-way group statistics carried from one view to the next, group by group.

An edit that leaves out, restores or moves rows changes the statistics (count, mean,
centred sum of squares) of the groups those rows are in, and nothing else. This module
keeps the statistics of every other group as they were and recomputes only the groups
an edit touches, from their kept rows, with the same corrected two-pass algorithm as a
full fit (:func:`.groupstats.group_stats`). ``np.bincount`` adds each group's rows in
row order whether it sees one group or all of them, so the numbers are bit for bit those
of a fit from scratch: an edit log gives the same results whatever path (edits, undos,
redos, a replay) led to a view, and no rounding accumulates from edit to edit. An edit
then costs the corrected two-pass over the touched groups' kept rows, found through a group index (one stable sort of
the codes, made at the first edit and shared while the codes stay), instead of a full fit
with its per-row arrays.

References
----------
Chan, T. F., Golub, G. H. and LeVeque, R. J. (1983). Algorithms for computing the
sample variance: analysis and recommendations. The American Statistician 37(3), 242-247
(the corrected two-pass algorithm, eq. 1.7).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .groupstats import GroupStats, group_stats
from .numerics import read_only
from .view import DataView
from .view_delta import ViewDelta

__all__ = ["GroupIndex", "RunningGroups", "running_groups", "update_groups"]


@dataclass(frozen=True, eq=False)
class GroupIndex:
    """The row positions of each group, in row order: group ``g``'s rows are ``order[starts[g]:starts[g + 1]]``.

    Built for one code array (``codes``, by identity) with one stable sort; shared by every view that
    has the same codes.
    """

    codes: np.ndarray
    order: np.ndarray
    starts: np.ndarray

    @classmethod
    def of(cls, codes: np.ndarray, k: int) -> GroupIndex:
        small = codes.astype(np.int16) if k <= np.iinfo(np.int16).max else codes  # radix sort: O(n)
        kind = np.int32 if codes.size < np.iinfo(np.int32).max else np.int64
        order = np.argsort(small, kind="stable").astype(kind, copy=False)
        starts = np.concatenate([[0], np.cumsum(np.bincount(codes, minlength=k))])
        return cls(codes, read_only(order), read_only(starts))

    def kept_rows(self, groups: np.ndarray, kept: np.ndarray) -> np.ndarray:
        """Positions of the kept rows of ``groups`` (sorted), group after group, each in row order."""
        parts = []
        for g in groups.tolist():
            rows = self.order[self.starts[g]:self.starts[g + 1]] if g + 1 < self.starts.size else self.order[:0]
            parts.append(rows[kept[rows]])
        return np.concatenate(parts) if len(parts) > 1 else parts[0]


@dataclass(frozen=True, eq=False)
class RunningGroups:
    """Statistics of every level of one factor over the kept rows (empty levels have n = 0), the
    positions of the rows left out, in order, and the group index when one has been built."""

    stats: GroupStats
    dropped: np.ndarray
    index: GroupIndex | None = None


def running_groups(y: np.ndarray, view: DataView, factor: str, offset: float) -> RunningGroups:
    """Statistics of the kept rows of ``view`` (corrected two-pass; one pass over the rows)."""
    kept = view.kept
    codes = view.codes[factor]
    if bool(kept.all()):
        stats = group_stats(y, codes, view.levels[factor], offset)
        dropped = np.empty(0, dtype=np.int64)
    else:
        stats = group_stats(y[kept], codes[kept], view.levels[factor], offset)
        dropped = np.flatnonzero(~kept)
    return RunningGroups(stats, read_only(dropped))


_ZEROS: list[np.ndarray] = [np.zeros(0, dtype=np.intp)]


def one_group(values: np.ndarray) -> tuple[int, float, float]:
    """Count, mean and centred sum of squares of one group's values, bit for bit as
    :func:`.groupstats.group_stats` gives them for that group (the same sequential sums), with one
    temporary array; ``values`` (a private copy) is overwritten."""
    m = int(values.size)
    if m == 0:
        return 0, 0.0, 0.0
    if _ZEROS[0].size < m:
        _ZEROS[0] = np.zeros(max(m, 2 * _ZEROS[0].size), dtype=np.intp)
    zeros = _ZEROS[0][:m]
    mean = float(np.bincount(zeros, weights=values)[0] / m)
    np.subtract(values, mean, out=values)
    rs = float(np.bincount(zeros, weights=values)[0])
    np.multiply(values, values, out=values)
    r2 = float(np.bincount(zeros, weights=values)[0])
    corr = rs / m
    return m, mean + corr, max(r2 - rs * corr, 0.0)


def _touched(delta: ViewDelta, new: DataView, factor: str) -> tuple[set[int], np.ndarray | None]:
    """Groups (numbered as in ``new``) whose rows change, and the map from old group numbers to new ones
    (``None``: the same numbers)."""
    touched: set[int] = set()
    old_to_new: np.ndarray | None = None
    for change in delta.codes:
        if change.factor != factor:
            continue
        step = np.asarray(change.remap if change.remap is not None else np.arange(len(change.levels_before)),
                          dtype=np.int64)
        if change.remap is not None:  # merged groups: every new group that several old ones map to
            counts = np.bincount(step, minlength=len(change.levels_after))
            touched = {int(step[g]) for g in touched}
            touched.update(np.flatnonzero(counts > 1).tolist())
        old_to_new = step if old_to_new is None else step[old_to_new]
        if change.positions.size:
            touched.update(step[change.before].tolist())
            touched.update(np.asarray(change.after).tolist())
    if delta.kept_positions.size:
        touched.update(new.codes[factor][delta.kept_positions].tolist())
    return touched, old_to_new


def _found(dropped: np.ndarray, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Where each of ``rows`` sits (or would go) in the sorted ``dropped``, and whether it is there."""
    at = np.searchsorted(dropped, rows)
    there = np.zeros(rows.size, dtype=bool) if not dropped.size else dropped[np.minimum(at, dropped.size - 1)] == rows
    return at, there


def _moved_back(dropped: np.ndarray, back: np.ndarray) -> np.ndarray:
    """The sorted positions ``dropped`` without ``back`` (as ``np.setdiff1d``, in O(changed rows log n) plus one
    copy)."""
    if not back.size:
        return dropped
    at, there = _found(dropped, back)
    at = at[there]
    if at.size == 1:
        i = int(at[0])
        return np.concatenate((dropped[:i], dropped[i + 1:]))
    return np.delete(dropped, at)


def _moved_out(dropped: np.ndarray, out: np.ndarray) -> np.ndarray:
    """The sorted positions ``dropped`` with ``out`` added (as ``np.union1d``, in O(changed rows log n) plus one
    copy)."""
    if not out.size:
        return dropped
    if out.size > 1:
        out = np.unique(out)
    at, there = _found(dropped, out)
    at, out = at[~there], out[~there]
    if at.size == 1:
        i = int(at[0])
        return np.concatenate((dropped[:i], out, dropped[i:]))
    return np.insert(dropped, at, out)


def update_groups(rg: RunningGroups, y: np.ndarray, new: DataView, delta: ViewDelta, factor: str) -> RunningGroups:
    """The statistics of ``new`` (the view ``delta`` leads to) from the previous ones: the groups the delta
    touches are recomputed from their kept rows, the others carried over unchanged."""
    old = rg.stats
    labels = new.levels[factor]
    k = len(labels)
    touched, old_to_new = _touched(delta, new, factor)
    touched = {g for g in touched if g < k}  # a level an undo takes away again has no rows left
    if old_to_new is None and old.k == k:  # the same groups: carry every one, then recompute the touched
        n, mean, m2 = old.n.copy(), old.mean.copy(), old.m2.copy()
    else:
        n, mean, m2 = np.zeros(k, dtype=np.int64), np.zeros(k), np.zeros(k)
        carried = np.arange(old.k) if old_to_new is None else old_to_new
        keep = np.array([g < k and g not in touched for g in carried.tolist()], dtype=bool)
        n[carried[keep]], mean[carried[keep]], m2[carried[keep]] = old.n[keep], old.mean[keep], old.m2[keep]
    codes = new.codes[factor]
    index = rg.index if rg.index is not None and rg.index.codes is codes else None
    if touched:
        groups = np.fromiter(sorted(touched), dtype=np.int64)
        if index is None:
            index = GroupIndex.of(codes, k)
        rows = index.kept_rows(groups, new.kept)
        if groups.size == 1:
            g = int(groups[0])
            n[g], mean[g], m2[g] = one_group(y[rows])
        else:
            part = group_stats(y[rows], codes[rows], labels, old.offset)
            n[groups], mean[groups], m2[groups] = part.n[groups], part.mean[groups], part.m2[groups]
    dropped = rg.dropped
    if delta.kept_positions.size:
        pos, after = delta.kept_positions, delta.kept_after
        dropped = _moved_out(_moved_back(dropped, pos[after]), pos[~after])
    stats = GroupStats(labels=labels, n=read_only(n), mean=read_only(mean), m2=read_only(m2), offset=old.offset)
    return RunningGroups(stats, read_only(np.asarray(dropped, dtype=np.int64)), index)
