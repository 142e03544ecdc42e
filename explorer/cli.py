"""Command line: check a data file, write a report, print replay code, open the demo or the app.

``variance-explorer`` (or ``python -m explorer``) with one of the commands::

    check  DATA --response Y --factor A [--factor B] [--block C] [--id-column ID] [--edits FILE]
    report DATA --response Y --factor A [...] [--edits FILE] [--compare FILE] -o OUT.html
    code   DATA --response Y --factor A [...] [--edits FILE]
    demo   [--no-browser] [--dry-run] [--port N] [-- extra JupyterLab options]
    app    STUDY_FILE --data DATA [--no-browser] [--dry-run] [--port N] [-- extra Voila options]

``--edits`` takes a study file written by ``study.save`` (spec, data fingerprint and the
edit log with reasons); its spec is used, so ``--response``/``--factor`` may be left out.

Exit codes (:data:`EXIT_CODES`): 0 done; 2 bad input (arguments, data file, columns,
values); 3 the edit file cannot be used (missing, not a saved study, made on other data,
an edit that no longer applies); 4 the output file cannot be written; 5 the notebook
server needed by ``demo``/``app`` is not installed or its notebook is missing. An
unexpected failure prints a traceback and exits with 1 (a bug: please report it).
"""

from __future__ import annotations

import argparse
import os
import secrets
import sys
import tempfile
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from .engine import ExplorerError, OutputError, ReplayError
from .engine.spec import OVERALL_TESTS, ModelSpec
from .study import Study
from .study.output_files import check_output_path, write_text_atomic
from .study.persistence import read_study_file

__all__ = ["main", "EXIT_CODES", "PROG"]

PROG = "variance-explorer"
EXIT_OK, EXIT_BAD_INPUT, EXIT_BAD_EDITS, EXIT_NO_OUTPUT, EXIT_NO_SERVER = 0, 2, 3, 4, 5
EXIT_CODES = {
    EXIT_OK: "done",
    EXIT_BAD_INPUT: "bad input: arguments, data file, column names or values",
    EXIT_BAD_EDITS: "the edit file cannot be used with these data",
    EXIT_NO_OUTPUT: "the output file cannot be written",
    EXIT_NO_SERVER: "the notebook server or the notebook for demo/app is not available",
}

#: The source checkout holding notebooks/ and data/ (an editable install points here).
PROJECT_ROOT = Path(__file__).resolve().parents[1]


class CommandError(Exception):
    """A failure with its exit code and a message for the user."""

    def __init__(self, code: int, message: str) -> None:
        super().__init__(message)
        self.code = code


class _Parser(argparse.ArgumentParser):
    """argparse that exits with EXIT_BAD_INPUT (its default 2, kept explicit) and a hint."""

    def error(self, message: str) -> None:  # type: ignore[override]
        self.print_usage(sys.stderr)
        self.exit(EXIT_BAD_INPUT, f"{self.prog}: error: {message}\n(see '{self.prog} --help')\n")


def _add_data_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("data", help="CSV, TSV, Parquet or Excel file, one row per observation")
    p.add_argument("--response", help="numeric column to analyse")
    p.add_argument("--factor", action="append", default=[], help="grouping column (repeat for more factors)")
    p.add_argument("--block", action="append", default=[], help="additive block column (repeatable)")
    p.add_argument("--alpha", type=float, help="level at which decisions are read (default 0.05)")
    p.add_argument("--test", choices=list(OVERALL_TESTS),
                   help="overall test the decision is read from (default classic; the others need one factor)")
    p.add_argument("--id-column", help="column of unique row ids (panel, sample, plot) used to name rows")
    p.add_argument("--edits", help="study file written by study.save: its edits (with reasons) are replayed")


def _output_args(p: argparse.ArgumentParser, what: str, required: bool = False) -> None:
    p.add_argument("-o", "--output", required=required, help=f"{what} (written whole or not at all)")
    p.add_argument("--force", action="store_true", help="replace the output file if it exists (never the data "
                   "or edit file)")


def _server_args(p: argparse.ArgumentParser) -> None:
    p.add_argument("--port", type=int, default=0, help="port on 127.0.0.1 (default 8888 for demo, 8866 for app; "
                   "the server moves to the next free one if it is taken)")
    p.add_argument("--no-browser", action="store_true", help="start the server without opening a browser")
    p.add_argument("--dry-run", action="store_true", help="print the command that would run, and stop")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog=PROG, description="Analysis of variance you can edit, defend and hand off.",
                     epilog="exit codes: " + "; ".join(f"{k} {v}" for k, v in EXIT_CODES.items()))
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)
    check = sub.add_parser("check", help="print the tables, edits, checks and sensitivity summary as text")
    _add_data_args(check)
    check.add_argument("--no-cautions", action="store_true", help="leave the cautions out of the printout")
    _output_args(check, "text file to write instead of printing")
    report = sub.add_parser("report", help="write a self-contained HTML report that opens offline")
    _add_data_args(report)
    _output_args(report, "HTML file to write", required=True)
    report.add_argument("--title", help="title of the report")
    report.add_argument("--scenario", help="one line saying what was compared and why")
    report.add_argument("--no-charts", action="store_true", help="tables only (no altair/vl-convert needed)")
    report.add_argument("--compare", metavar="STUDY_FILE",
                        help="a colleague's study file of the same data, set beside this study in its own section")
    code = sub.add_parser("code", help="print Python that rebuilds the study (load, then each edit)")
    _add_data_args(code)
    _output_args(code, "Python file to write instead of printing")
    demo = sub.add_parser("demo", help="open the demo notebook in JupyterLab on 127.0.0.1")
    _server_args(demo)
    app = sub.add_parser("app", help="serve the explorer for a saved study as a web page (Voila on 127.0.0.1)")
    app.add_argument("study_file", help="study file written by study.save")
    app.add_argument("--data", required=True, help="the data file the study was made on")
    app.add_argument("--idle-minutes", type=float, default=15.0, help="shut down the kernel of a page closed for "
                     "this long (default 15)")
    app.add_argument("--no-token", action="store_true", help="serve without the access token (anyone on this "
                     "machine can then open the page and read the data)")
    _server_args(app)
    return parser


# --------------------------------------------------------------------------- study
def _check_path(path: str, what: str) -> Path:
    p = Path(path)
    if not p.exists():
        raise CommandError(EXIT_BAD_INPUT if what == "data file" else EXIT_BAD_EDITS,
                           f"no {what} at {path!r} (relative paths start from {Path.cwd()})")
    if p.is_dir():
        raise CommandError(EXIT_BAD_INPUT if what == "data file" else EXIT_BAD_EDITS,
                           f"{path!r} is a folder; give the path of the {what}")
    return p


def _about(path: Path, exc: Exception) -> str:
    """The error message, naming the edit file unless it already does."""
    text = str(exc)
    return text if repr(path.name) in text else f"edit file {path.name!r}: {text}"


def _spec_conflict(saved: ModelSpec, args: argparse.Namespace) -> str | None:
    asked = []
    if args.response and args.response != saved.response:
        asked.append(f"--response {args.response!r} but the file has {saved.response!r}")
    if args.factor and tuple(args.factor) != saved.factors:
        asked.append(f"--factor {args.factor} but the file has {list(saved.factors)}")
    if args.block and tuple(args.block) != saved.blocks:
        asked.append(f"--block {args.block} but the file has {list(saved.blocks)}")
    if args.alpha is not None and args.alpha != saved.alpha:
        asked.append(f"--alpha {args.alpha:g} but the file has {saved.alpha:g}")
    if args.test is not None and args.test != saved.test:
        asked.append(f"--test {args.test} but the file has {saved.test}")
    return "; ".join(asked) or None


def load_study(args: argparse.Namespace) -> Study:
    """The study the data arguments describe, with the edit file replayed when given."""
    data = _check_path(args.data, "data file")
    if args.edits:
        edits = _check_path(args.edits, "edit file")
        try:
            doc = read_study_file(edits)
            saved = ModelSpec.from_dict(doc["spec"])
        except (ExplorerError, KeyError, TypeError) as exc:
            raise CommandError(EXIT_BAD_EDITS, _about(edits, exc)) from None
        conflict = _spec_conflict(saved, args)
        if conflict:
            raise CommandError(EXIT_BAD_EDITS, f"edit file {edits.name!r} was saved for another model: {conflict}; "
                                               "leave those options out to use the file's")
        try:
            study = Study.from_dict(doc, data)
        except ReplayError as exc:
            raise CommandError(EXIT_BAD_EDITS, _about(edits, exc)) from None
        return study
    if not args.response or not args.factor:
        missing = [n for n, v in (("--response", args.response), ("--factor", args.factor)) if not v]
        raise CommandError(EXIT_BAD_INPUT, f"name the {' and '.join(missing)} (or give --edits with a saved study)")
    kwargs: dict[str, Any] = {"alpha": args.alpha} if args.alpha is not None else {}
    if args.test is not None:
        kwargs["test"] = args.test
    return Study(data, response=args.response, factors=args.factor, blocks=args.block, id_column=args.id_column,
                 **kwargs)


# --------------------------------------------------------------------------- commands
def _inputs(args: argparse.Namespace) -> list[tuple[str, str]]:
    """The files a command reads; no output may replace them, even with --force."""
    other = getattr(args, "compare", None)
    return ([("data file", args.data)] + ([("edit file", args.edits)] if args.edits else [])
            + ([("colleague's study file", other)] if other else []))


def _check_output(args: argparse.Namespace) -> None:
    """Refuse a bad output path before any analysis runs (exit 4)."""
    if args.output is not None:
        try:
            check_output_path(args.output, overwrite=args.force, protect=_inputs(args))
        except OutputError as exc:
            raise CommandError(EXIT_NO_OUTPUT, str(exc)) from None


def _emit(args: argparse.Namespace, text: str) -> None:
    """Print ``text``, or write it atomically to ``--output``."""
    if args.output is None:
        sys.stdout.write(text)
        return
    try:
        write_text_atomic(args.output, text, overwrite=args.force, protect=_inputs(args))
    except OutputError as exc:
        raise CommandError(EXIT_NO_OUTPUT, str(exc)) from None


def _check(args: argparse.Namespace) -> int:
    from .report.text_summary import summary_text

    _check_output(args)
    study = load_study(args)
    _emit(args, summary_text(study, cautions=not args.no_cautions))
    return EXIT_OK


def _report(args: argparse.Namespace) -> int:
    from .report import write_report

    _check_output(args)
    study = load_study(args)
    other = None
    if args.compare:
        other = _check_path(args.compare, "edit file")
        try:
            study.compare(other)  # refused here (other data, other row ids or question), before any writing
        except ExplorerError as exc:
            raise CommandError(EXIT_BAD_EDITS, _about(other, exc)) from None
    try:
        out = write_report(study, args.output, title=args.title, scenario=args.scenario, charts=not args.no_charts,
                           overwrite=args.force, protect=_inputs(args), compare=other)
    except OutputError as exc:
        raise CommandError(EXIT_NO_OUTPUT, str(exc)) from None
    print(f"wrote {out} ({out.stat().st_size // 1024} KB): {study.decision.sentence()}")
    return EXIT_OK


def _code(args: argparse.Namespace) -> int:
    _check_output(args)
    study = load_study(args)
    _emit(args, study.to_code(data=args.data))
    return EXIT_OK


def _need(module: str, extra_name: str) -> None:
    import importlib.util

    if importlib.util.find_spec(module) is None:
        raise CommandError(EXIT_NO_SERVER, f"{module} is not installed: pip install 'variance-explorer[{extra_name}]'")


class _Stop(Exception):
    """Raised by the SIGTERM handler so the server is stopped and temporary files removed."""


def _run(cmd: list[str], dry_run: bool, cwd: Path, env: dict[str, str] | None = None) -> int:
    """Print ``cmd``; unless ``dry_run``, run it (with ``env``) until it ends, Ctrl-C or SIGTERM (passed on to it)."""
    import shlex
    import signal
    import subprocess

    print(f"cd {shlex.quote(str(cwd))} && {shlex.join(cmd)}", flush=True)
    if dry_run:
        return EXIT_OK

    def stop(signum: int, frame: object) -> None:
        raise _Stop

    previous = signal.signal(signal.SIGTERM, stop)
    child = subprocess.Popen(cmd, cwd=cwd, env=env)
    try:
        return child.wait()
    except (KeyboardInterrupt, _Stop):
        child.terminate()
        try:
            child.wait(timeout=20)
        except subprocess.TimeoutExpired:
            child.kill()
            child.wait()
        return EXIT_OK
    finally:
        signal.signal(signal.SIGTERM, previous)


def _demo(args: argparse.Namespace) -> int:
    notebook = PROJECT_ROOT / "notebooks" / "demo.ipynb"
    if not notebook.exists():
        raise CommandError(EXIT_NO_SERVER, f"the demo notebook is not at {str(notebook)!r}: run the demo from a "
                                           "source checkout installed with pip install -e '.[widget]'")
    _need("jupyterlab", "widget")
    cmd = [sys.executable, "-m", "jupyterlab", "--ip=127.0.0.1", f"--port={args.port or 8888}",
           f"--ServerApp.root_dir={PROJECT_ROOT}", "--LabApp.default_url=/lab/tree/notebooks/demo.ipynb",
           "--LabApp.news_url=None", "--LabApp.check_for_updates_class=jupyterlab.NeverCheckForUpdate"]
    if args.no_browser:
        cmd.append("--no-browser")
    if hasattr(os, "geteuid") and os.geteuid() == 0:
        cmd.append("--allow-root")  # JupyterLab refuses to start as root without it
    cmd += args.extra
    return _run(cmd, args.dry_run, PROJECT_ROOT)


def _app(args: argparse.Namespace) -> int:
    from .notebooks import app_notebook, write_notebook

    study_file = _check_path(args.study_file, "edit file")
    data = _check_path(args.data, "data file")
    try:
        doc = read_study_file(study_file)
        Study.from_dict(doc, data)  # refuse here, with a clear message, rather than in the page
    except ExplorerError as exc:
        raise CommandError(EXIT_BAD_EDITS, _about(study_file, exc)) from None
    _need("voila", "widget")
    from .app_server import TOKEN_ENV

    with tempfile.TemporaryDirectory(prefix="variance-explorer-app-") as tmp:
        page = Path(tmp) / "explorer.ipynb"
        if not args.dry_run:
            write_notebook(app_notebook(study_file.resolve(), data.resolve()), page)
        port = args.port or 8866
        cmd = [sys.executable, "-m", "explorer.app_server", str(page), "--Voila.ip=127.0.0.1", f"--port={port}",
               "--theme=light", f"--MappingKernelManager.cull_idle_timeout={max(int(args.idle_minutes * 60), 1)}"]
        if args.no_browser:
            cmd.append("--no-browser")
        cmd += args.extra
        token = "" if args.no_token else secrets.token_urlsafe(32)
        if not args.dry_run:
            if token:
                print(f"open http://127.0.0.1:{port}/?token={token} (if that port is taken, the server prints "
                      "the address it uses); the token keeps other users of this machine out", flush=True)
            else:
                print("warning: no token: anyone on this machine can open the page and read the data", flush=True)
        return _run(cmd, args.dry_run, Path.cwd(), env={**os.environ, TOKEN_ENV: token})


COMMANDS = {"check": _check, "report": _report, "code": _code, "demo": _demo, "app": _app}


def main(argv: Sequence[str] | None = None) -> int:
    """Run one command; return its exit code (see :data:`EXIT_CODES`)."""
    argv = list(sys.argv[1:] if argv is None else argv)
    extra: list[str] = []
    if "--" in argv:  # everything after '--' goes to the notebook server (demo, app)
        cut = argv.index("--")
        argv, extra = argv[:cut], argv[cut + 1 :]
    args = build_parser().parse_args(argv)
    args.extra = extra
    try:
        return COMMANDS[args.command](args)
    except CommandError as exc:
        print(f"{PROG} {args.command}: error: {exc}", file=sys.stderr)
        return exc.code
    except ExplorerError as exc:
        print(f"{PROG} {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT

