"""Take a common offset out of the response before the analysis, exactly where possible.

A sum of squares is invariant to shifting the response, but float64 keeps about 16
significant digits: values such as 1000000000000.4 leave only four digits for the
spread. Subtracting an offset close to the data first keeps them all:

* from decimal text (CSV), the subtraction is done in decimal arithmetic, so the
  shifted values are exact before their one rounding to float64;
* from floats, the offset is a data value, and the subtraction of two floats within a
  factor of two of each other is exact (Sterbenz's lemma).

References
----------
Simon, S. D. and Lesage, J. P. (1989). Assessing the accuracy of ANOVA calculations in
statistical software. Computational Statistics & Data Analysis 8, 325-332.
Sterbenz, P. H. (1974). Floating-Point Computation. Prentice-Hall, theorem 4.3.1.
"""

from __future__ import annotations

import decimal
from decimal import Decimal

import numpy as np

__all__ = ["shift_text", "shift_float"]

_CTX = decimal.Context(prec=80)


def shift_float(y: np.ndarray) -> tuple[np.ndarray, float, str]:
    """Shift floats by the median data value; return (shifted, offset, offset as text)."""
    if y.size == 0:
        return y.astype(np.float64), 0.0, "0"
    out = np.array(y, dtype=np.float64, copy=True)  # one array: partitioned for the median, then the result
    k = y.size // 2
    out.partition(k)
    offset = float(out[k])
    if not np.isfinite(offset) or abs(offset) < 1.0:
        np.copyto(out, y)
        return out, 0.0, "0"
    np.subtract(y, offset, out=out)
    return out, offset, repr(offset)


def shift_text(texts: list[str]) -> tuple[np.ndarray, float, str]:
    """Shift decimal strings exactly by a decimal near their median.

    The offset is the median value (a data value, so it has no more digits than the
    data). Each shifted value ``Decimal(t) - offset`` is exact and rounds to float64
    once.
    """
    if not texts:
        return np.empty(0), 0.0, "0"
    values = [Decimal(t.strip()) for t in texts]
    as_float = np.array([float(v) for v in values])
    order = int(np.argsort(as_float, kind="stable")[len(values) // 2])
    offset = values[order]
    if abs(offset) < 1:
        return as_float, 0.0, "0"
    shifted = np.array([float(_CTX.subtract(v, offset)) for v in values])
    return shifted, float(offset), str(offset)
