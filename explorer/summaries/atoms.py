"""What a database engine hands back: per-"atom" counts, means and centred sums of squares.

An atom is one combination of the raw values of the factor columns (and, per factor,
the index of the latest row-move predicate that caught the rows, 0 for none). Atoms
are the finest grouping any edit can need: merging, renaming or setting aside levels
and cells only pools or removes atoms, which is exact arithmetic on their statistics
(:func:`explorer.engine.groupstats.pool_groups`), so only predicate edits go back to the
engine.

The engines compute each atom's statistics with the corrected two-pass algorithm
(Chan, Golub and LeVeque 1983, eq. 1.7) on the response minus an exact offset: a
first pass for the means, a second for the sum and the sum of squares of the
deviations from them. :func:`finish_two_pass` applies the correction.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from decimal import Decimal

import numpy as np

from ..engine.dataset import level_label, natural_key
from ..engine.errors import DataError
from ..engine.groupstats import pool_groups

__all__ = ["MOVE_PREFIX", "AtomTable", "Prepared", "downdate", "finish_two_pass", "level_order", "merge_atoms", "choose_offset"]

#: Raw key of rows caught by row-move predicate k of a factor: MOVE_PREFIX + str(k).
MOVE_PREFIX = "\x00move:"


@dataclass(frozen=True, kw_only=True)
class Prepared:
    """A source checked for one response and factor list, with the response's exact offset.

    ``decimal_scale`` is set when the response is read as an exact decimal (DECIMAL
    columns, or plain decimal text in CSV files); the engine then subtracts the offset
    in decimal arithmetic and rounds once to float64. ``offset`` is in units of
    ``2**unit_exponent``, like the shifted response the engine summarises.
    """

    response: str
    factors: tuple[str, ...]
    offset: float
    offset_text: str
    decimal_scale: int | None
    numeric_factors: tuple[str, ...]
    rows_total: int
    rows_set_aside: int | None  # None: found from the first summary (total minus rows summarised)
    set_aside_detail: tuple[str, ...] = ()
    notes: tuple[str, ...] = field(default=())
    unit_exponent: int = 0  # the shifted response is in units of 2**unit_exponent (see engine.response_unit)


@dataclass(frozen=True, kw_only=True, eq=False)
class AtomTable:
    """Per-atom statistics on the shifted scale (``mean + offset`` is the response mean).

    ``raw[j]`` holds the raw value of factor ``j`` for each atom; ``move`` is an
    (atoms x factors) array of row-move indices (0: not moved).
    """

    factors: tuple[str, ...]
    raw: tuple[tuple[object, ...], ...]
    move: np.ndarray
    n: np.ndarray
    mean: np.ndarray
    m2: np.ndarray
    offset: float

    @property
    def size(self) -> int:
        return int(self.n.size)

    @property
    def n_total(self) -> int:
        return int(self.n.sum())

    def keys(self, j: int) -> list[str]:
        """Raw key of each atom for factor ``j``: its level label, or the move key."""
        return [MOVE_PREFIX + str(int(m)) if m else level_label(v) for v, m in zip(self.raw[j], self.move[:, j])]


def finish_two_pass(n: np.ndarray, mean1: np.ndarray, rs: np.ndarray, r2: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Corrected two-pass finish: mean and centred SS from pass-one means and pass-two sums.

    ``rs`` and ``r2`` are the sums of ``y - mean1`` and ``(y - mean1)^2`` per atom
    (Chan, Golub and LeVeque 1983, eq. 1.7).
    """
    nf = np.maximum(np.asarray(n, dtype=np.float64), 1.0)
    corr = np.asarray(rs, dtype=np.float64) / nf
    mean = np.asarray(mean1, dtype=np.float64) + corr
    m2 = np.maximum(np.asarray(r2, dtype=np.float64) - np.asarray(rs, dtype=np.float64) * corr, 0.0)
    return mean, m2


def level_order(values: Sequence[object], numeric: bool) -> tuple[str, ...]:
    """Level labels in display order: numeric values by value, text in natural order (as row studies do)."""
    labels: dict[str, object] = {}
    for v in values:
        labels.setdefault(level_label(v), v)
    if numeric:
        return tuple(sorted(labels, key=lambda s: float(labels[s])))  # type: ignore[arg-type]
    return tuple(sorted(labels, key=natural_key))


def choose_offset(value: object) -> tuple[float, str, Decimal | float]:
    """The offset rule of row studies: a data value near the median, 0 when it is below 1 in size."""
    if value is None:
        raise DataError("the response has no usable values (every row has a missing response or factor value)")
    if isinstance(value, Decimal):
        if abs(value) < 1:
            return 0.0, "0", Decimal(0)
        return float(value), str(value), value
    f = float(value)  # type: ignore[arg-type]
    if not np.isfinite(f) or abs(f) < 1.0:
        return 0.0, "0", 0.0
    return f, repr(f), f


def _atom_keys(t: AtomTable) -> list[tuple]:
    return [tuple(t.raw[j][i] for j in range(len(t.factors))) + tuple(int(m) for m in t.move[i]) for i in range(t.size)]


def _subset(t: AtomTable, keep: np.ndarray) -> AtomTable:
    return AtomTable(factors=t.factors, raw=tuple(tuple(v for v, k in zip(col, keep) if k) for col in t.raw),
                     move=t.move[keep], n=t.n[keep], mean=t.mean[keep], m2=t.m2[keep], offset=t.offset)


#: A downdate may lose at most this share of a centred SS (three digits) before a full scan is preferred.
_MAX_LOSS = 1e-3


def downdate(parent: AtomTable, removed: AtomTable) -> AtomTable | None:
    """``parent`` without the rows summarised in ``removed`` (a subset of them, atom by atom).

    Inverse of the pairwise merge (Chan, Golub and LeVeque 1983): with ``k`` the kept part,
    ``mean_k = mean + n_r (mean - mean_r) / n_k`` and
    ``m2_k = m2 - m2_r - n_k n_r / n (mean_k - mean_r)^2``. The subtraction loses digits
    when the kept part holds a small share of the atom's count or sum of squares; then
    ``None`` is returned and the caller summarises the kept rows afresh.
    """
    index = {k: i for i, k in enumerate(_atom_keys(parent))}
    n = parent.n.astype(np.float64).copy()
    mean = parent.mean.copy()
    m2 = parent.m2.copy()
    for key, nr, mr, qr in zip(_atom_keys(removed), removed.n.astype(np.float64), removed.mean, removed.m2):
        j = index.get(key)
        if j is None or nr > n[j]:
            return None
        nk = n[j] - nr
        if nk == 0:
            n[j], mean[j], m2[j] = 0.0, 0.0, 0.0
            continue
        mk = mean[j] + nr * (mean[j] - mr) / nk
        qk = m2[j] - qr - nk * nr / n[j] * (mk - mr) ** 2
        if nk < _MAX_LOSS * n[j] or qk < _MAX_LOSS * m2[j]:
            return None
        n[j], mean[j], m2[j] = nk, mk, max(qk, 0.0)
    out = AtomTable(factors=parent.factors, raw=parent.raw, move=parent.move, n=np.rint(n).astype(np.int64),
                    mean=mean, m2=m2, offset=parent.offset)
    return _subset(out, out.n > 0)


def merge_atoms(parent: AtomTable, added: AtomTable) -> AtomTable:
    """``parent`` with the rows summarised in ``added`` joined in (pairwise merge; no digits lost)."""
    keys = _atom_keys(parent) + _atom_keys(added)
    index: dict[tuple, int] = {}
    codes = np.asarray([index.setdefault(k, len(index)) for k in keys], dtype=np.int64)
    pooled = pool_groups(np.concatenate([parent.n, added.n]), np.concatenate([parent.mean, added.mean]),
                         np.concatenate([parent.m2, added.m2]), codes, tuple(str(i) for i in range(len(index))),
                         parent.offset)
    k = len(parent.factors)
    order = list(index)
    return AtomTable(factors=parent.factors, raw=tuple(tuple(key[j] for key in order) for j in range(k)),
                     move=np.asarray([key[k:] for key in order], dtype=np.int64).reshape(-1, k),
                     n=pooled.n, mean=np.asarray(pooled.mean), m2=np.asarray(pooled.m2), offset=parent.offset)
