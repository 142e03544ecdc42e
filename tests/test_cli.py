"""The command line: each command on the demo data, and bad input with its documented exit code."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pandas as pd
import pytest

import explorer as ex
from explorer.cli import EXIT_CODES, main
from explorer.formatting import show_stat
from explorer.report import CAUTIONS

ROOT = Path(__file__).resolve().parents[1]
DEMO = str(ROOT / "data" / "coating_thickness.csv")
BASE = ["--response", "thickness_um", "--factor", "nozzle"]


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def saved(tmp_path) -> Path:
    study = ex.Study(DEMO, response="thickness_um", factors="nozzle")
    study.drop([6], reason="P1007 gauge slip")
    study.drop([70], reason="P1071 recoated by mistake")
    return study.save(tmp_path / "coating.study.json")


def test_exit_codes_are_documented():
    assert set(EXIT_CODES) == {0, 2, 3, 4, 5}
    doc = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    for code in EXIT_CODES:
        assert f"| {code} |" in doc


# ------------------------------------------------------------------ commands on the demo data
def test_check_prints_tables_and_decision(capsys):
    """Numbers match the kit's own partition of the demo data (checked against references in test_oneway)."""
    code, out, err = run(capsys, "check", DEMO, *BASE)
    assert code == 0 and err == ""
    res = ex.Study(DEMO, response="thickness_um", factors="nozzle").results
    assert f" {show_stat(res.partition.row('nozzle').statistic)} " in out  # the one formatter's digits
    decision = ex.Study(DEMO, response="thickness_um", factors="nozzle").decision
    assert "Baseline (unedited data)" in out and decision.sentence() in out
    assert "Sensitivity of the decision" in out and "Disclosure:" in out
    assert "Leaving data out needs a documented reason." in out


def test_check_with_edits_shows_reasons_and_current(capsys, saved):
    code, out, _ = run(capsys, "check", DEMO, "--edits", str(saved), "--no-cautions")
    assert code == 0
    assert "P1007 gauge slip" in out and "P1071 recoated by mistake" in out
    assert "Current (after 2 edit(s))" in out
    assert "nozzle: no differences detected" in out
    assert "Cautions" not in out


def test_report_writes_offline_html(capsys, saved, tmp_path):
    out_file = tmp_path / "coating-report.html"
    code, out, _ = run(capsys, "report", DEMO, *BASE, "--edits", str(saved), "-o", str(out_file), "--no-charts")
    assert code == 0 and out.startswith("wrote ")
    page = out_file.read_text(encoding="utf-8")
    assert "P1071 recoated by mistake" in page and "Content-Security-Policy" in page
    assert _plain_caution(CAUTIONS[0]) in page


def _plain_caution(c: str) -> str:
    return c.split("**")[1]


def test_code_prints_replay(capsys, saved):
    code, out, _ = run(capsys, "code", DEMO, "--edits", str(saved))
    assert code == 0
    scope: dict = {}
    exec(out, scope)  # noqa: S102
    assert scope["study"].results.partition == ex.Study.load(saved, DEMO).results.partition


def test_demo_dry_run_prints_a_loopback_command(capsys):
    code, out, _ = run(capsys, "demo", "--no-browser", "--dry-run", "--port", "8899")
    assert code == 0
    assert "-m jupyterlab" in out and "--ip=127.0.0.1" in out and "--port=8899" in out
    assert "--no-browser" in out and "notebooks/demo.ipynb" in out


def test_app_dry_run(capsys, saved):
    code, out, _ = run(capsys, "app", str(saved), "--data", DEMO, "--dry-run", "--no-browser")
    assert code == 0 and "-m explorer.app_server" in out and "--Voila.ip=127.0.0.1" in out


def test_module_and_script_exit_codes(tmp_path):
    """``python -m explorer`` runs the command line and exits 0 on the demo data."""
    ok = subprocess.run([sys.executable, "-m", "explorer", "check", DEMO, *BASE], capture_output=True, text=True)
    assert ok.returncode == 0 and "nozzle" in ok.stdout


def test_check_needs_no_chart_libraries():
    """The text commands work without the widget extra: altair is never imported."""
    code = ("import sys; from explorer.cli import main; rc = main(['check', %r, *%r]); "
            "print(rc, 'altair' in sys.modules, 'ipywidgets' in sys.modules)" % (DEMO, BASE))
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert proc.stdout.strip().splitlines()[-1] == "0 False False"


def test_installed_script_passes_exit_code(tmp_path):
    """The `variance-explorer` script (pyproject entry point) passes the exit code to the shell."""
    script = Path(sys.executable).parent / "variance-explorer"
    if script.exists():
        bad = subprocess.run([str(script), "check", str(tmp_path / "nope.csv"), *BASE], capture_output=True, text=True)
        assert bad.returncode == 2 and "no data file" in bad.stderr


# ------------------------------------------------------------------ bad input
def test_bad_path_is_exit_2(capsys, tmp_path):
    code, out, err = run(capsys, "check", str(tmp_path / "missing.csv"), *BASE)
    assert code == 2 and out == "" and "no data file at" in err and "missing.csv" in err


def test_folder_as_data_is_exit_2(capsys, tmp_path):
    code, _, err = run(capsys, "check", str(tmp_path), *BASE)
    assert code == 2 and "is a folder" in err


def test_unknown_column_is_exit_2_with_suggestion(capsys):
    code, _, err = run(capsys, "check", DEMO, "--response", "thickness", "--factor", "nozzle")
    assert code == 2 and "'thickness'" in err and "Did you mean" in err and "thickness_um" in err


def test_non_numeric_response_is_exit_2(capsys, tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text("g,y\na,1\na,2\nb,three\nb,4\n")
    code, _, err = run(capsys, "check", str(bad), "--response", "y", "--factor", "g")
    assert code == 2 and "non-numeric" in err and "'three'" in err


def test_missing_arguments_are_exit_2(capsys):
    code, _, err = run(capsys, "check", DEMO, "--factor", "nozzle")
    assert code == 2 and "--response" in err
    with pytest.raises(SystemExit) as exc:  # argparse: -o is required for report
        main(["report", DEMO, *BASE])
    assert exc.value.code == 2
    with pytest.raises(SystemExit) as exc:
        main(["frobnicate"])
    assert exc.value.code == 2


@pytest.mark.parametrize("content, message", [
    ("{not json", "not valid JSON"),
    ('{"hello": 1}', "not a saved study"),
    (None, "no edit file at"),
])
def test_unusable_edit_file_is_exit_3(capsys, tmp_path, content, message):
    f = tmp_path / "edits.json"
    if content is not None:
        f.write_text(content)
    code, out, err = run(capsys, "check", DEMO, *BASE, "--edits", str(f))
    assert code == 3 and out == "" and message in err


def test_edit_file_from_other_data_is_exit_3(capsys, tmp_path, saved):
    changed = tmp_path / "changed.csv"
    lines = Path(DEMO).read_text().splitlines()
    lines[12] = lines[12].rsplit(",", 1)[0] + ",99.9"  # one reading altered (row 11)
    changed.write_text("\n".join(lines) + "\n")
    code, _, err = run(capsys, "check", str(changed), "--edits", str(saved))
    assert code == 3 and "rows whose values changed: 11" in err


def test_edit_file_for_another_model_is_exit_3(capsys, saved):
    code, _, err = run(capsys, "check", DEMO, "--response", "thickness_um", "--factor", "shift", "--edits", str(saved))
    assert code == 3 and "another model" in err and "'shift'" not in err.split("file has")[1]


def test_unwritable_output_is_exit_4(capsys, tmp_path):
    code, _, err = run(capsys, "report", DEMO, *BASE, "-o", str(tmp_path / "no" / "such" / "r.html"))
    assert code == 4 and "does not exist" in err
    code, _, err = run(capsys, "report", DEMO, *BASE, "-o", str(tmp_path))
    assert code == 4 and "is a folder" in err


def test_app_with_bad_study_file_is_exit_3(capsys, tmp_path):
    f = tmp_path / "x.json"
    f.write_text("[]")
    code, _, err = run(capsys, "app", str(f), "--data", DEMO, "--dry-run")
    assert code == 3 and "not a saved study" in err


def test_data_file_is_never_changed(capsys, tmp_path, saved):
    before = Path(DEMO).read_bytes()
    run(capsys, "report", DEMO, "--edits", str(saved), "-o", str(tmp_path / "r.html"), "--no-charts")
    assert Path(DEMO).read_bytes() == before


# ------------------------------------------------------------------ demo server, for real
def test_demo_serves_the_notebook_on_loopback(tmp_path):
    """``demo --no-browser`` starts JupyterLab on 127.0.0.1 and the demo notebook is there."""
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    token = "demo-test"
    env = {**os.environ, "HOME": str(tmp_path), "JUPYTER_PLATFORM_DIRS": "1"}
    proc = subprocess.Popen(
        [sys.executable, "-m", "explorer", "demo", "--no-browser", "--port", str(port), "--",
         f"--IdentityProvider.token={token}", "--LabApp.extension_manager=readonly"],
        env=env, stdout=subprocess.DEVNULL, stderr=open(tmp_path / "lab.log", "w"))
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.time() + 90
        while True:
            try:
                with urllib.request.urlopen(f"{base}/api/contents/notebooks/demo.ipynb?token={token}", timeout=3) as r:
                    model = json.load(r)
                break
            except OSError:
                assert proc.poll() is None, (tmp_path / "lab.log").read_text()
                assert time.time() < deadline, "JupyterLab did not answer"
                time.sleep(0.3)
        assert model["type"] == "notebook" and model["name"] == "demo.ipynb"
    finally:
        try:
            urllib.request.urlopen(urllib.request.Request(f"{base}/api/shutdown?token={token}", method="POST"), timeout=5)
            proc.wait(timeout=20)
        except Exception:
            proc.kill()
            proc.wait()


def test_missing_server_or_notebook_is_exit_5(capsys, monkeypatch, tmp_path):
    import importlib.util

    import explorer.cli as cli

    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec", lambda name, *a: None if name == "jupyterlab" else real(name, *a))
    code, _, err = run(capsys, "demo", "--dry-run")
    assert code == 5 and "jupyterlab is not installed" in err and "[widget]" in err
    monkeypatch.setattr(cli, "PROJECT_ROOT", tmp_path)
    code, _, err = run(capsys, "demo", "--dry-run")
    assert code == 5 and "demo notebook is not at" in err


def test_id_column_names_rows(capsys):
    code, out, _ = run(capsys, "check", DEMO, *BASE, "--id-column", "panel", "--no-cautions")
    assert code == 0 and "single rows whose removal flips it" in out and "P1007" in out
    code, _, err = run(capsys, "check", DEMO, *BASE, "--id-column", "panels")
    assert code == 2 and "'panels'" in err and "Did you mean" in err


def test_report_sets_a_colleagues_study_beside(capsys, saved, tmp_path):
    """--compare adds the section; a file of other data is refused (exit 3) and nothing is written."""
    colleague = ex.Study(DEMO, response="thickness_um", factors="nozzle")
    colleague.merge_levels("nozzle", ["N2", "N3"], into="N2+N3", reason="one supplier")
    theirs = colleague.save(tmp_path / "colleague.study.json")
    out_file = tmp_path / "side.html"
    code, _, err = run(capsys, "report", DEMO, *BASE, "--edits", str(saved), "--compare", str(theirs),
                       "-o", str(out_file), "--no-charts")
    assert code == 0, err
    page = out_file.read_text(encoding="utf-8")
    assert "<section id='colleague'><h2>Beside colleague.study.json</h2>" in page and "one supplier" in page
    other = pd.read_csv(DEMO)
    other.loc[0, "thickness_um"] += 1
    other.to_csv(tmp_path / "other.csv", index=False)
    stranger = ex.Study(tmp_path / "other.csv", response="thickness_um", factors="nozzle").save(
        tmp_path / "stranger.study.json")
    code, _, err = run(capsys, "report", DEMO, *BASE, "--edits", str(saved), "--compare", str(stranger),
                       "-o", str(tmp_path / "no.html"), "--no-charts")
    assert code == 3 and "stranger.study.json" in err and not (tmp_path / "no.html").exists()
    code, _, err = run(capsys, "report", DEMO, *BASE, "--edits", str(saved), "--compare", str(theirs),
                       "-o", str(theirs), "--force", "--no-charts")
    assert code == 4 and ex.Study.load(theirs, DEMO).edits[0].kind == "merge"  # never written over
