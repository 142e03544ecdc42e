"""The numerical rules every fit and scan shares, in one place.

* **Scale of the response.** A residual sum of squares is judged against the magnitude
  of the response, ``response_scale(offset, values)``: the largest of ``|offset|`` and
  ``|values|``, where ``values`` are the shifted observations or their level (cell)
  means. The two choices agree whenever the rule below can fire (a residual sum of
  squares at rounding level means every observation sits on its fitted mean), so the
  engine reads means where it has them and the row-level code reads rows.
* **Zero sums of squares.** ``is_zero_ss(ss, n, scale)``: a sum of ``n`` squared
  residuals counts as zero when it is at most ``n (8 eps scale)^2``, i.e. when every
  residual could be rounding error of a few operations on numbers of size ``scale``
  (``eps`` = 2^-52, the float64 machine epsilon). Below that, F and the scaled
  residuals are undefined and the results say so; they never become a huge F from
  rounding noise.
* **Rank of a least-squares problem.** ``qr_rank(r_diagonal, shape)``: the number of
  diagonal entries of a pivoted QR's R above ``|r_11| max(shape) eps`` (the tolerance
  of numpy's ``matrix_rank``), or above a fixed reference magnitude when the ranks of
  several column subsets are compared.
* **Read-only arrays.** Arrays a frozen value holds are marked read-only
  (``read_only``, in place; ``read_only_copy``, a float copy), so a caller cannot change
  a result or a dataset through them.

The response's unit is the other numerical safeguard: far from 1 the shifted response is
taken in a power-of-two unit so that its squares neither overflow nor underflow
(:mod:`.response_unit`); the rules here are invariant to that unit (both sides of the
zero test scale with its square).

References
----------
Golub, G. H. and Van Loan, C. F. (2013). Matrix Computations, 4th ed., sec. 5.4.1
(rank from a pivoted QR) and sec. 2.7 (rounding error of sums).
Higham, N. J. (2002). Accuracy and Stability of Numerical Algorithms, 2nd ed., ch. 4
(error of summation) and sec. 1.9 (variance by two passes).
"""

from __future__ import annotations

from typing import Any

import numpy as np

__all__ = ["EPS", "TINY", "is_zero_ss", "qr_rank", "read_only", "read_only_copy", "response_scale"]

#: float64 machine epsilon (2**-52).
EPS = float(np.finfo(float).eps)
#: Floor of a scale, so that an all-zero response still has a positive one.
TINY = 1e-300


def response_scale(offset: float, values: Any = ()) -> float:
    """The magnitude a residual sum of squares is judged against.

    Parameters
    ----------
    offset : the exact offset taken out of the response (``Dataset.offset``).
    values : the shifted observations, or their level or cell means (any array; may be empty).

    Returns
    -------
    float
        ``max(|offset|, max |values|)``, at least :data:`TINY`.
    """
    v = np.asarray(values, dtype=np.float64)
    largest = float(np.abs(v).max()) if v.size else 0.0
    return max(abs(float(offset)), largest, TINY)


def is_zero_ss(ss: Any, n: Any, scale: float) -> Any:
    """Whether a sum of ``n`` squared residuals is zero to rounding at ``scale``.

    ``ss`` and ``n`` may be numbers (returns ``bool``) or arrays of alternatives
    (returns a boolean array). The rule is ``ss <= n (8 eps scale)^2``.
    """
    bound = (8 * EPS * max(float(scale), TINY)) ** 2
    if type(ss) is float and type(n) is int:  # one number: the same IEEE operations without arrays
        return ss <= n * bound
    zero = np.asarray(ss) <= np.asarray(n) * bound
    return bool(zero) if zero.ndim == 0 else zero


def qr_rank(r_diagonal: np.ndarray, shape: tuple[int, ...], reference: float | None = None) -> int:
    """Numerical rank from the diagonal of a pivoted QR's R (largest first).

    An entry counts when its magnitude exceeds ``reference max(shape) eps``; the
    reference is ``|r_11|`` unless given (a fixed one compares the ranks of several
    column subsets of one matrix on the same footing).
    """
    d = np.abs(np.asarray(r_diagonal, dtype=np.float64))
    if d.size == 0:
        return 0
    ref = d[0] if reference is None else reference
    return int(np.sum(d > ref * max(shape) * EPS))


def read_only(a: np.ndarray) -> np.ndarray:
    """Mark ``a`` read-only in place and return it."""
    a.setflags(write=False)
    return a


def read_only_copy(a: Any) -> np.ndarray:
    """A read-only float64 copy of ``a`` (the caller's array stays writable)."""
    out = np.array(a, dtype=np.float64)
    out.setflags(write=False)
    return out
