"""Replay a study as Python source: load the original data, then each edit with its reason.

The code uses only the public API (``Study`` and its edit methods), so a colleague can
paste it into a cell or run it as a script and land in the same state: the same view,
hence the same results, bit for bit (the analysis is a pure function of the data, the
model spec and the ordered edits). Edit times are kept as comments; undone edits are not
replayed but listed, and the sensitivity searches are re-counted so the disclosure
(``study.disclosure``) still shows how many alternatives were examined.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..core.edits import DropRows, Edit, MergeLevels, Reassign, RenameLevel, RestoreRows

if TYPE_CHECKING:
    from ..core.study import Study

__all__ = ["study_to_code", "edit_to_code"]


def _lit(value: Any) -> str:
    """A Python literal for ``value`` (tuples become lists, as the edit methods take lists)."""
    if isinstance(value, tuple):
        return "[" + ", ".join(_lit(v) for v in value) + "]"
    return repr(value)


def edit_to_code(edit: Edit, name: str = "study") -> str:
    """One statement that applies ``edit`` to the study called ``name``.

    The five built-in kinds become calls of the study's own methods; any other
    registered kind (subclasses included) is rebuilt from its saved form with
    ``edit_from_dict``.
    """
    r = f"reason={edit.reason!r}"
    if type(edit) is DropRows:
        return f"{name}.drop({_lit(edit.rows)}, {r})"
    if type(edit) is RestoreRows:
        return f"{name}.restore({_lit(edit.rows)}, {r})"
    if type(edit) is Reassign:
        return f"{name}.reassign({edit.row!r}, {edit.factor!r}, {edit.level!r}, {r})"
    if type(edit) is MergeLevels:
        return f"{name}.merge_levels({edit.factor!r}, {_lit(edit.levels)}, into={edit.into!r}, {r})"
    if type(edit) is RenameLevel:
        return f"{name}.rename_level({edit.factor!r}, {edit.old!r}, {edit.new!r}, {r})"
    return f"{name}.apply(ex.edit_from_dict({edit.to_dict()!r}))"


def _spec_args(study: "Study") -> str:
    spec = study.spec
    factors = spec.factors[0] if len(spec.factors) == 1 else list(spec.factors)
    args = [f"response={spec.response!r}", f"factors={factors!r}"]
    if spec.blocks:
        args.append(f"blocks={list(spec.blocks)!r}")
    if not spec.interactions:
        args.append("interactions=False")
    if spec.ss_type != "II":
        args.append(f"ss_type={spec.ss_type!r}")
    if spec.alpha != 0.05:
        args.append(f"alpha={spec.alpha!r}")
    if study.dataset.id_column is not None:
        args.append(f"id_column={study.dataset.id_column!r}")
    args.extend(_role_args(spec))
    return ", ".join(args)


def _role_args(spec) -> list[str]:
    """Model terms and the roles of random, nested and repeated-measures designs (only when used)."""
    out = []
    if spec.terms is not None:
        out.append(f"terms={[' × '.join(t) if len(t) > 1 else t[0] for t in spec.terms]!r}")
    if spec.max_order is not None:
        out.append(f"max_order={spec.max_order!r}")
    if spec.random:
        out.append(f"random={list(spec.random)!r}")
    if spec.nested:
        out.append(f"nested={ {inner: (p[0] if len(p) == 1 else list(p)) for inner, p in spec.nested}!r}")
    if spec.subject is not None:
        out.append(f"subject={spec.subject!r}")
        out.append(f"within={list(spec.within)!r}")
    return out


def study_to_code(study: "Study", data: str | Path | None = None, *, name: str = "study") -> str:
    """Python source that rebuilds ``study`` from its original data.

    Parameters
    ----------
    study : the study to replay.
    data : path of the data file to load. Default: the path the study was built from
        (``study.data_source``); a study built from a DataFrame expects a DataFrame
        called ``data`` to exist where the code runs.
    name : variable name of the study in the code.

    Returns
    -------
    str
        Source code; ``exec`` it (or paste it) to get a study whose ``results`` equal
        ``study.results`` exactly.
    """
    src = data if data is not None else getattr(study, "data_source", None)
    ds = study.dataset
    lines = [
        "# Replay of an analysis-of-variance study: the original data, then each edit with its reason.",
        f"# Data: {ds.source} (fingerprint {ds.fingerprint}, {len(ds.table)} rows"
        + (f", {len(ds.set_aside)} set aside at load for missing values)" if ds.set_aside else ")"),
        "import explorer as ex",
        "",
    ]
    if src is None:
        lines.append("# The study was built from a DataFrame: define `data` (the same table) before running this.")
        data_expr = "data"
    else:
        data_expr = repr(str(Path(src).as_posix()) if isinstance(src, Path) else str(src))
    lines.append(f"{name} = ex.Study({data_expr}, {_spec_args(study)})")
    lines.append(f"assert {name}.dataset.fingerprint == {ds.fingerprint!r}, 'the data differ from the original'")
    for i, edit in enumerate(study.edits, 1):
        lines.append(f"{edit_to_code(edit, name)}  # edit {i}, made {edit.at}")
    undone = study.redo_edits
    if undone:
        lines.append(f"# {len(undone)} undone edit(s), not replayed:")
        lines.extend(f"#   {edit_to_code(e, name)}  # made {e.at}" for e in undone)
    for search in getattr(study, "_searches", []):
        lines.append(f"{name}.record_search({str(search.get('what', ''))!r}, {int(search.get('count', 0))})")
    d = study.disclosure
    lines.append(
        f"# Disclosure of the original study: {d.sentence()}."
    )
    lines.append(f"{name}.results")
    return "\n".join(lines) + "\n"
