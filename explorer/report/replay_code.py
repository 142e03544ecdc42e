"""Replay a study as Python source: load the original data, then each edit with its reason.

The code uses only the public API (``Study`` and its edit methods), so a colleague can
paste it into a cell or run it as a script and land in the same state: the same view,
hence the same results, bit for bit (the analysis is a pure function of the data, the
model spec and the ordered edits). Undone edits are not replayed but listed, and the
study's ledger (every edit made, undone ones too, every undo, specification choice and
search, with times; :mod:`explorer.study.ledger`) is handed to the rebuilt study as a
literal, so its disclosure (``study.disclosure``) equals the original's exactly.

Safety: every value that comes from the user or a file (column and level names, row
ids, reasons, edit times, paths) enters the code only as a Python literal built by
:func:`python_literal` (``repr`` of plain values), never inside a comment or as bare
text; comments hold only the kit's own words and numbers. So a newline or a quote in a
reason or a file name cannot become a statement.
"""

from __future__ import annotations

import keyword
import math
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..engine.column_digest import COLUMN_SHA256
from ..engine.edits import DropRows, DropUnit, Edit, MergeLevels, Reassign, RenameLevel, RestoreRows, RestoreUnit
from ..study.persistence import level_order

if TYPE_CHECKING:
    from ..study.study import Study

__all__ = ["study_to_code", "edit_to_code", "python_literal"]


def python_literal(value: Any) -> str:
    """Python source for a plain value: str, int, float, bool, None, and lists/tuples/dicts of them.

    Tuples become lists (the edit methods take lists); non-finite floats become
    ``float('nan')``-style calls; anything else is refused with ``TypeError``, so no
    object's own ``repr`` ever reaches the code.
    """
    if value is None or isinstance(value, (bool, str)):
        return repr(value)
    if isinstance(value, int):
        return repr(int(value))
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else f"float({repr(str(value))})"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(python_literal(v) for v in value) + "]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{python_literal(k)}: {python_literal(v)}" for k, v in value.items()) + "}"
    if hasattr(value, "item") and callable(value.item):  # numpy scalars
        return python_literal(value.item())
    raise TypeError(f"cannot write a value of type {type(value).__name__} into replay code")


_lit = python_literal


def _name(name: str) -> str:
    if not (isinstance(name, str) and name.isidentifier() and not keyword.iskeyword(name)):
        raise ValueError(f"the study's variable name must be a Python identifier, not {name!r}")
    return name


def edit_to_code(edit: Edit, name: str = "study") -> str:
    """One statement that applies ``edit`` to the study called ``name``.

    The five built-in kinds become calls of the study's own methods; any other
    registered kind (subclasses included) is rebuilt from its saved form with
    ``edit_from_dict``.
    """
    name = _name(name)
    r = f"reason={_lit(edit.reason)}"
    if type(edit) is DropRows:
        return f"{name}.drop({_lit(edit.rows)}, {r})"
    if type(edit) is RestoreRows:
        return f"{name}.restore({_lit(edit.rows)}, {r})"
    if type(edit) is Reassign:
        return f"{name}.reassign({_lit(edit.row)}, {_lit(edit.factor)}, {_lit(edit.level)}, {r})"
    if type(edit) is MergeLevels:
        return f"{name}.merge_levels({_lit(edit.factor)}, {_lit(edit.levels)}, into={_lit(edit.into)}, {r})"
    if type(edit) is RenameLevel:
        return f"{name}.rename_level({_lit(edit.factor)}, {_lit(edit.old)}, {_lit(edit.new)}, {r})"
    if type(edit) in (DropUnit, RestoreUnit):
        verb = "drop_unit" if type(edit) is DropUnit else "restore_unit"
        return f"{name}.{verb}({_lit(edit.column)}, {_lit(edit.level)}, {r})"  # type: ignore[attr-defined]
    return f"{name}.apply(ex.edit_from_dict({_lit(edit.to_dict())}))"


def _tuple_literal(labels: list[str]) -> str:
    """A tuple of text literals (``Dataset.levels`` holds tuples; :func:`python_literal` writes lists)."""
    return "(" + ", ".join(_lit(x) for x in labels) + ("," if len(labels) == 1 else "") + ")"


def _order_message(factor: str, labels: list[str]) -> str:
    target = repr(labels) if len(labels) <= 12 else "<the levels in the order asserted here>"
    return (f"the levels of {factor!r} are in another order than the study was analysed with; put them in that "
            f"order first, e.g. data[{factor!r}] = data[{factor!r}].cat.reorder_categories({target})")


def _spec_args(study: "Study") -> str:
    spec = study.spec
    factors = spec.factors[0] if len(spec.factors) == 1 else list(spec.factors)
    args = [f"response={_lit(spec.response)}", f"factors={_lit(factors)}"]
    if spec.blocks:
        args.append(f"blocks={_lit(list(spec.blocks))}")
    if not spec.interactions:
        args.append("interactions=False")
    if spec.ss_type != "II":
        args.append(f"ss_type={_lit(spec.ss_type)}")
    if spec.alpha != 0.05:
        args.append(f"alpha={_lit(float(spec.alpha))}")
    if spec.test != "classic":
        args.append(f"test={_lit(spec.test)}")
    if spec.transform != "none":
        args.append(f"transform={_lit(spec.transform)}")
    if spec.covariates:
        args.append(f"covariates={_lit(list(spec.covariates))}")
    if study.dataset.id_column is not None:
        args.append(f"id_column={_lit(study.dataset.id_column)}")
    args.extend(_role_args(spec))
    return ", ".join(args)


def _role_args(spec) -> list[str]:
    """Model terms and the roles of random, nested and repeated-measures designs (only when used)."""
    out = []
    if spec.terms is not None:
        out.append(f"terms={_lit([' × '.join(t) if len(t) > 1 else t[0] for t in spec.terms])}")
    if spec.max_order is not None:
        out.append(f"max_order={_lit(spec.max_order)}")
    if spec.random:
        out.append(f"random={_lit(list(spec.random))}")
    if spec.nested:
        out.append(f"nested={_lit({inner: (p[0] if len(p) == 1 else list(p)) for inner, p in spec.nested})}")
    if spec.subject is not None:
        out.append(f"subject={_lit(spec.subject)}")
        out.append(f"within={_lit(list(spec.within))}")
    if spec.variance_method != "auto":
        out.append(f"variance_method={_lit(spec.variance_method)}")
    return out


def study_to_code(study: "Study", data: str | Path | None = None, *, name: str = "study") -> str:
    """Python source that rebuilds ``study`` from its original data.

    Parameters
    ----------
    study : the study to replay.
    data : path of the data file to load. Default: the path the study was built from
        (``study.data_source``); a study built from a DataFrame expects a DataFrame
        called ``data`` to exist where the code runs.
    name : variable name of the study in the code (a Python identifier).

    Returns
    -------
    str
        Source code; ``exec`` it (or paste it) to get a study whose ``results`` equal
        ``study.results`` exactly.
    """
    name = _name(name)
    src = data if data is not None else getattr(study, "data_source", None)
    ds = study.dataset
    aside = f", {len(ds.set_aside)} set aside at load for missing values" if ds.set_aside else ""
    lines = [
        "# Replay of an analysis-of-variance study: the original data, then each edit with its reason.",
        f"# The data: {len(ds.table)} rows{aside}; their source and fingerprint ({COLUMN_SHA256}):",
        f"source = {_lit(ds.source)}",
        f"fingerprint = {_lit(ds.fingerprint_by(COLUMN_SHA256))}",
        "# When each edit in effect was made (UTC), in order:",
        f"made_at = {_lit([e.at for e in study.edits])}",
        "import explorer as ex",
        "",
    ]
    if src is None:
        lines.append("# The study was built from a DataFrame: define `data` (the same table) before running this.")
        data_expr = "data"
    else:
        data_expr = _lit(Path(src).as_posix() if isinstance(src, Path) else str(src))
    lines.append(f"{name} = ex.Study({data_expr}, {_spec_args(study)})")
    lines.append(f"assert {name}.dataset.fingerprint_by({_lit(COLUMN_SHA256)}) == fingerprint, "
                 "'the data differ from the original'")
    order = level_order(ds, study.spec)
    if order:
        lines.append("# Each factor's levels in the order the study was analysed with: 'later' contrasts and two-level")
        lines.append("# differences (first - second) follow it, and the fingerprint does not see a categorical's order.")
    for factor, labels in order.items():
        lines.append(f"assert {name}.dataset.levels[{_lit(factor)}] == {_tuple_literal(labels)}, "
                     f"{_lit(_order_message(factor, labels))}")
    for i, edit in enumerate(study.edits, 1):
        lines.append(f"{edit_to_code(edit, name)}  # edit {i}, made at made_at[{i - 1}]")
    undone = study.redo_edits
    if undone:
        lines.append(f"# {len(undone)} undone edit(s), kept for redo and not replayed, in their saved form:")
        lines.append(f"undone = {_lit([e.to_dict() for e in undone])}")
    for request in getattr(study, "planned_requests", ()):
        method, args, kwargs = study.planned_call(request)
        call = ", ".join([_lit(a) for a in args] + [f"{_name(k)}={_lit(v)}" for k, v in kwargs.items()])
        lines.append(f"{name}.{_name(method)}({call})  # planned analysis, recomputed after every edit")
    if study.comparisons != "tukey-kramer":
        lines.append(f"{name}.set_comparisons({_lit(study.comparisons)})")
    lines.append("# The original study's record: every edit made (undone ones too), undo, redo, reset,")
    lines.append("# specification choice and search, with times; the rebuilt study takes it as its own.")
    lines.append(f"ledger = {_lit(study.ledger.to_dict())}")
    lines.append(f"{name}.restore_ledger(ledger)")
    lines.append("# Disclosure of the original study, to compare with study.disclosure.sentence():")
    lines.append(f"original_disclosure = {_lit(study.disclosure.sentence())}")
    lines.append(f"{name}.results")
    return "\n".join(lines) + "\n"
