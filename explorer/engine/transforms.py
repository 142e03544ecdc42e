"""Transforms of the response: the log, the square root and Box-Cox powers, as a model choice.

A transform is part of the model specification (``ModelSpec.transform``): ``"none"``,
``"log"`` (natural log), ``"sqrt"`` or a number lambda, the Box-Cox power
``(y^lambda - 1) / lambda`` (Box and Cox 1964). A power of 0 is the log and a power of 1
a shift of the response, so they are written ``"log"`` and ``"none"`` (one name for one
analysis). The analysis then runs on the transformed response: every table, test, scan
and chart of the study reads it, and the study's dataset says which transform it holds.

The log and Box-Cox powers need every usable value above zero, the square root every
value at zero or above; a response that breaks this is refused with the rows named (the
check covers every usable row, so no later edit can bring back a value the transform
cannot take).

References
----------
Box, G. E. P. and Cox, D. R. (1964). An analysis of transformations. JRSS B 26, 211-252.
"""

from __future__ import annotations

import dataclasses
import math
import weakref
from numbers import Real
from typing import TYPE_CHECKING, Any

import numpy as np

from .errors import DataError, ExplorerError, preview
from .numerics import read_only
from .response_unit import safe_unit, unit_note

if TYPE_CHECKING:
    from .dataset import Dataset

__all__ = ["NAMED", "Transform", "check_transform", "inverse", "transform_label", "transform_values", "with_transform"]

Transform = Any  # "none" | "log" | "sqrt" | float (a Box-Cox power)

#: Named transforms: name -> plain description.
NAMED = {"none": "response as measured", "log": "natural log of the response", "sqrt": "square root of the response"}


def check_transform(value: Any) -> str | float:
    """The transform in its one written form; a clear error for anything else."""
    if isinstance(value, str):
        v = value.strip().lower()
        if v in NAMED:
            return v
        raise ExplorerError(f"transform must be one of {list(NAMED)} or a Box-Cox power (a number), not {value!r}")
    if isinstance(value, bool) or not isinstance(value, (Real, np.integer, np.floating)):
        raise ExplorerError(f"transform must be one of {list(NAMED)} or a Box-Cox power (a number), not {value!r}")
    lam = float(value)
    if not math.isfinite(lam) or abs(lam) > 10:
        raise ExplorerError(f"a Box-Cox power must be a finite number between -10 and 10, not {value!r}")
    if lam == 0:
        return "log"
    if lam == 1:
        return "none"
    return lam


def transform_label(transform: Transform, response: str) -> str:
    """``log(thickness)``, ``sqrt(thickness)``, ``Box-Cox 0.37 of thickness`` or the name itself."""
    if transform == "none":
        return response
    if transform in ("log", "sqrt"):
        return f"{transform}({response})"
    return f"Box-Cox {float(transform):g} of {response}"


def transform_values(y: np.ndarray, transform: Transform, response: str = "the response",
                     row_ids: np.ndarray | None = None) -> np.ndarray:
    """The transformed values; :class:`DataError` naming the rows a transform cannot take."""
    y = np.asarray(y, dtype=np.float64)
    if transform == "none":
        return y
    if transform == "sqrt":
        bad = ~(y >= 0)
        need = "at zero or above"
    else:
        bad = ~(y > 0)
        need = "above zero"
    if np.any(bad):
        where = np.flatnonzero(bad)
        ids = row_ids[where].tolist() if row_ids is not None else where.tolist()
        name = "the log" if transform == "log" else "the square root" if transform == "sqrt" else "a Box-Cox power"
        raise DataError(
            f"{name} needs every value of {response!r} {need}; {where.size} row(s) are not (rows {preview(ids)}, "
            f"smallest {float(np.min(y)):.6g}). Keep the response as measured, or use a rank or trimmed-means test"
        )
    out: np.ndarray
    if transform == "log":
        out = np.log(y)
    elif transform == "sqrt":
        out = np.sqrt(y)
    else:
        lam = float(transform)
        out = np.expm1(lam * np.log(y)) / lam
    return out


def inverse(t: np.ndarray, transform: Transform) -> np.ndarray:
    """The response as measured from transformed values (to rounding)."""
    t = np.asarray(t, dtype=np.float64)
    if transform == "none":
        return t
    out: np.ndarray
    if transform == "log":
        out = np.exp(t)
    elif transform == "sqrt":
        out = t * t
    else:
        lam = float(transform)
        out = np.exp(np.log1p(lam * t) / lam)
    return out


#: Transformed datasets while something holds them, by (the measured dataset's id, transform). Values are weak: a
#: transformed dataset holds its measured one (``untransformed``), so a cache holding it would keep both alive for
#: as long as the process runs; a live value's measured dataset is alive too, so its id is not reused.
_CACHE: weakref.WeakValueDictionary[tuple[int, Any], Any] = weakref.WeakValueDictionary()


def with_transform(dataset: Dataset, transform: Transform) -> Dataset:
    """The dataset whose response is ``transform`` of the measured one (the same dataset for 'none').

    The measured dataset is kept in ``untransformed``, so asking for another transform
    (or none) always starts from the values as measured. Memoised per dataset.
    """
    if type(transform) is str and transform == getattr(dataset, "transform", "none"):  # as written: no check
        return dataset
    transform = check_transform(transform)
    base = dataset.untransformed if dataset.untransformed is not None else dataset
    if transform == getattr(dataset, "transform", "none"):
        return dataset
    if transform == "none":
        return base
    key = (id(base), transform)
    hit = _CACHE.get(key)
    if hit is not None and hit.untransformed is base:
        return hit  # type: ignore[no-any-return]
    measured = np.ldexp(base.y_original, base.unit_exponent)  # exact, also where 2.0**e would overflow
    t = transform_values(measured, transform, base.response, base.row_ids)
    if not np.all(np.isfinite(t)):
        raise DataError(f"{transform_label(transform, base.response)} is not finite for some rows "
                        "(values too large for the power); choose another transform")
    med = float(np.median(t)) if t.size else 0.0
    offset = (float(np.float32(med)) if abs(med) < 3e38 else med) if abs(med) >= 1 else 0.0
    y, offset, unit = safe_unit(t - offset, offset, t)  # transformed values far from 1 get a power-of-two unit too
    y = read_only(y)
    notes = base.notes + ((unit_note(transform_label(transform, base.response), unit),) if unit else ())
    out = dataclasses.replace(base, y=y, offset=offset, offset_text=repr(offset), unit_exponent=unit,
                              transform=transform, untransformed=base, notes=notes)
    _CACHE[key] = out
    return out
