"""A power-of-two unit for the shifted response, so that squares never overflow or underflow.

Sums of squares square the response: for |y - offset| beyond about 1e154 they overflow
float64 and below about 1e-154 they fall into the subnormal range (digits lost) and
then to zero. F, p-values, effect sizes and decisions do not depend on the unit of the
response, so when the shifted response leaves the safe band ``[2**-SAFE, 2**SAFE]``
the analysis works in units of ``2**e`` instead: every value is multiplied by
``2**-e``, which is exact in binary floating point (only the exponent changes), and
its largest magnitude lands in [0.5, 1). The results are then *exactly* those of the
data divided by ``2**e``; means, SDs and intervals are in that unit and sums of
squares in its square, as the note says.

The band leaves room for n (up to 2**40 rows) times the fourth powers some tests form
(Welch's and Brown-Forsythe's df): (2**200)**4 * 2**80 < 2**1023.

References
----------
IEEE 754-2019, sec. 5.3.3 (scaleB: exact scaling by a power of the radix).
Higham, N. J. (2002). Accuracy and Stability of Numerical Algorithms, 2nd ed., sec. 2.1.
"""

from __future__ import annotations

import math

import numpy as np

from .decimal_shift import shift_float

__all__ = ["SAFE", "pow2_factors", "rescale", "safe_unit", "unit_exponent", "unit_note"]

#: The shifted response is left in its own unit while its largest magnitude is within 2**-SAFE .. 2**SAFE.
SAFE = 200


def unit_exponent(largest: float) -> int:
    """The exponent e of the unit 2**e for a shifted response whose largest magnitude is ``largest``.

    0 inside the safe band (and for 0 or a non-finite input); otherwise the exponent that
    brings ``largest`` into [0.5, 1).
    """
    m = abs(float(largest))
    if m == 0.0 or not math.isfinite(m) or 2.0**-SAFE <= m <= 2.0**SAFE:
        return 0
    return math.frexp(m)[1]


def rescale(values: np.ndarray, e: int) -> np.ndarray:
    """``values * 2**-e``, exactly (``np.ldexp``; a new array)."""
    return np.ldexp(np.asarray(values, dtype=np.float64), -int(e))


def pow2_factors(e: int) -> list[float]:
    """Normal floats whose product is ``2**-e`` (one, or two when ``2**-e`` itself is not a normal float).

    For engines that scale by multiplying with a literal (SQL, Spark): each factor is an
    exact power of two, so each multiplication is exact.
    """
    e = -int(e)
    parts = [e] if abs(e) <= 1000 else [e // 2, e - e // 2]
    return [math.ldexp(1.0, p) for p in parts]


def unit_note(response: str, e: int) -> str:
    """The sentence that tells the reader the analysis works in units of 2**e."""
    approx = f"{10 ** (e * math.log10(2) % 1):.3g}e{int(math.floor(e * math.log10(2))):+d}"
    why = "overflow" if e > 0 else "underflow"
    return (
        f"Response {response!r} in units of 2**{e} (about {approx}): its values are so far from zero that their "
        f"squares would {why} in 64-bit floating point, so the analysis divides them by 2**{e}, which is exact. "
        "Means, SDs, intervals, fitted values and residuals are in that unit and sums of squares in its square; "
        "F, p-values, effect sizes and decisions do not depend on the unit."
    )


def safe_unit(y: np.ndarray, offset: float, raw: np.ndarray) -> tuple[np.ndarray, float, int]:
    """The shifted response and its offset in units of 2**e (see the module docstring), and e.

    When the shift itself overflows (values of both signs near the float limit), the raw
    values are scaled first: scaling by a power of two commutes with the subtraction.
    """
    top, bottom = (float(y.max()), float(y.min())) if y.size else (0.0, 0.0)  # no row-sized temporary
    if not (np.isfinite(top) and np.isfinite(bottom)):
        pre = 8
        y, offset, _ = shift_float(rescale(raw, pre))
        e = pre + unit_exponent(float(np.max(np.abs(y))))
        return rescale(y, e - pre), float(np.ldexp(offset, pre - e)), e
    e = unit_exponent(max(abs(top), abs(bottom)))
    if not e:
        return y, offset, 0
    return rescale(y, e), float(np.ldexp(offset, -e)), e
