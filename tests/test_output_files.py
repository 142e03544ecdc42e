"""Files the kit writes: atomic (a failed write leaves the old file), never over the inputs, never over
an existing file unless asked (study.save over its own study file is allowed)."""

from __future__ import annotations

import errno
import hashlib
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

import explorer as ex
from explorer.cli import EXIT_NO_OUTPUT, main
from explorer.engine.errors import OutputError
from explorer.study.output_files import write_text_atomic

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "data" / "coating_thickness.csv"
ARGS = ["--response", "thickness_um", "--factor", "nozzle"]


def _digest(p: Path) -> str:
    return hashlib.sha256(p.read_bytes()).hexdigest()


@pytest.fixture
def data(tmp_path) -> Path:
    p = tmp_path / "data.csv"
    p.write_bytes(DEMO.read_bytes())
    return p


def _leftovers(folder: Path) -> list[str]:
    return [p.name for p in folder.iterdir() if p.name.endswith(".tmp")]


# ---------------------------------------------------------------- the quoted defect and its relatives
@pytest.mark.parametrize("command", ["report", "code", "check"])
def test_cli_refuses_to_write_over_the_data_file(capsys, data, command):
    """`report data.csv -o data.csv` used to turn the data into HTML and exit 0."""
    before = _digest(data)
    code = main([command, str(data), *ARGS, "-o", str(data), "--force"])
    assert code == EXIT_NO_OUTPUT
    assert "will not write over the data file" in capsys.readouterr().err
    assert _digest(data) == before


def test_cli_refuses_links_and_other_spellings_of_the_data_file(capsys, data, monkeypatch):
    before = _digest(data)
    (data.parent / "soft.html").symlink_to(data)
    os.link(data, data.parent / "hard.html")
    monkeypatch.chdir(data.parent)
    for out in ["soft.html", "hard.html", "./sub/../data.csv", str(data)]:
        (data.parent / "sub").mkdir(exist_ok=True)
        assert main(["report", "data.csv", *ARGS, "-o", out, "--force", "--no-charts"]) == EXIT_NO_OUTPUT, out
    assert _digest(data) == before
    assert capsys.readouterr().err.count("will not write over the data file") == 4


def test_cli_refuses_to_write_over_the_edit_file(capsys, data, tmp_path):
    study = ex.Study(data, response="thickness_um", factors="nozzle")
    study.drop([6], reason="gauge slip")
    saved = study.save(tmp_path / "s.study.json")
    before = _digest(saved)
    assert main(["report", str(data), "--edits", str(saved), "-o", str(saved), "--force"]) == EXIT_NO_OUTPUT
    assert "will not write over the edit file" in capsys.readouterr().err
    assert _digest(saved) == before


def test_cli_existing_output_needs_force(capsys, data, tmp_path):
    out = tmp_path / "r.html"
    out.write_text("keep me")
    assert main(["report", str(data), *ARGS, "-o", str(out), "--no-charts"]) == EXIT_NO_OUTPUT
    assert "exists" in capsys.readouterr().err and out.read_text() == "keep me"
    assert main(["report", str(data), *ARGS, "-o", str(out), "--no-charts", "--force"]) == 0
    assert out.read_text().startswith("<!DOCTYPE html>")


def test_cli_code_and_check_write_files(capsys, data, tmp_path):
    assert main(["code", str(data), *ARGS, "-o", str(tmp_path / "replay.py")]) == 0
    assert main(["check", str(data), *ARGS, "-o", str(tmp_path / "check.txt")]) == 0
    assert capsys.readouterr().out == ""
    assert "ex.Study(" in (tmp_path / "replay.py").read_text()
    assert "p-value" in (tmp_path / "check.txt").read_text()


# ---------------------------------------------------------------- the Python API
def test_save_over_its_own_study_file_is_allowed_other_files_are_not(data, tmp_path):
    study = ex.Study(data, response="thickness_um", factors="nozzle")
    path = study.save(tmp_path / "a.study.json")
    study.drop([6], reason="gauge slip")
    study.save(path)  # its own earlier file: the normal case
    loaded = ex.Study.load(path, data)
    loaded.drop([7], reason="second look")
    loaded.save(path)  # the file it was loaded from is its own too
    assert len(ex.Study.load(path, data).edits) == 2
    other = tmp_path / "b.study.json"
    other.write_text("someone else's")
    with pytest.raises(OutputError, match="exists; pass overwrite=True"):
        loaded.save(other)
    assert other.read_text() == "someone else's"
    loaded.save(other, overwrite=True)
    with pytest.raises(OutputError, match="will not write over the data file"):
        loaded.save(data, overwrite=True)


def test_report_and_code_never_replace_the_study_or_data_file(data, tmp_path):
    study = ex.Study(data, response="thickness_um", factors="nozzle")
    saved = study.save(tmp_path / "a.study.json")
    loaded = ex.Study.load(saved, data)
    before = _digest(saved)
    with pytest.raises(OutputError, match="will not write over the study file"):
        loaded.report(saved, overwrite=True)
    with pytest.raises(OutputError, match="will not write over the data file"):
        loaded.to_code(path=data, overwrite=True)
    assert _digest(saved) == before
    code = loaded.to_code(path=tmp_path / "replay.py")
    assert (tmp_path / "replay.py").read_text() == code
    with pytest.raises(OutputError, match="exists"):
        loaded.to_code(path=tmp_path / "replay.py")


def test_bad_targets_are_named(tmp_path):
    with pytest.raises(OutputError, match="is a folder"):
        write_text_atomic(tmp_path, "x")
    with pytest.raises(OutputError, match="does not exist"):
        write_text_atomic(tmp_path / "no" / "x.html", "x")
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    with pytest.raises(OutputError, match="not a regular file"):
        write_text_atomic(fifo, "x", overwrite=True)


def test_replacing_keeps_permissions_and_follows_links(tmp_path):
    target = tmp_path / "t.txt"
    target.write_text("old")
    target.chmod(0o640)
    link = tmp_path / "link.txt"
    link.symlink_to(target)
    write_text_atomic(link, "new", overwrite=True)
    assert link.is_symlink() and target.read_text() == "new"
    assert target.stat().st_mode & 0o777 == 0o640
    assert _leftovers(tmp_path) == []


# ---------------------------------------------------------------- failures mid-write leave the old file
def test_full_disk_mid_write_leaves_the_old_file(tmp_path, monkeypatch):
    """A simulated full disk after the first 4 KiB: the old file stays, no temporary file remains."""
    target = tmp_path / "report.html"
    target.write_text("the old report")
    real_write = os.write
    written = {"n": 0}

    def filling_write(fd, data):
        if written["n"] >= 4096:
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        n = real_write(fd, bytes(data[:1024]))
        written["n"] += n
        return n

    monkeypatch.setattr(os, "write", filling_write)
    with pytest.raises(OutputError, match="No space left on device.*old file.*unchanged"):
        write_text_atomic(target, "x" * 100_000, overwrite=True)
    monkeypatch.undo()
    assert target.read_text() == "the old report"
    assert _leftovers(tmp_path) == []


SIZE_LIMIT = textwrap.dedent("""
    import resource, signal, sys
    signal.signal(signal.SIGXFSZ, signal.SIG_IGN)   # the write then fails with EFBIG instead of killing us
    resource.setrlimit(resource.RLIMIT_FSIZE, (20_000, 20_000))
    import explorer as ex
    from explorer.cli import main
    study = ex.Study(sys.argv[1], response="thickness_um", factors="nozzle")
    study.drop([6], reason="gauge slip")
    try:
        study.save(sys.argv[2])
    except ex.OutputError as exc:
        print("save:", exc)
    sys.exit(main(["report", sys.argv[1], "--response", "thickness_um", "--factor", "nozzle", "-o", sys.argv[3],
                   "--force", "--no-charts"]))
""")


def test_file_size_limit_leaves_the_old_files(data, tmp_path):
    """RLIMIT_FSIZE below the new files' size: save and report fail cleanly, old files intact (exit 4)."""
    study_file, report = tmp_path / "s.study.json", tmp_path / "r.html"
    study_file.write_text("old study")
    report.write_text("old report")
    ex.Study(data, response="thickness_um", factors="nozzle")  # the data are fine
    proc = subprocess.run([sys.executable, "-c", SIZE_LIMIT, str(data), str(study_file), str(report)],
                          capture_output=True, text=True, timeout=120, cwd=tmp_path,
                          env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert proc.returncode == EXIT_NO_OUTPUT, proc.stderr
    assert "save:" in proc.stdout and "exists" in proc.stdout  # refused before writing: not its own file
    assert "File too large" in proc.stderr and "unchanged" in proc.stderr
    assert study_file.read_text() == "old study" and report.read_text() == "old report"
    assert _leftovers(tmp_path) == []


def test_file_size_limit_on_save_over_own_file(data, tmp_path):
    script = textwrap.dedent("""
        import resource, signal, sys
        import explorer as ex
        study = ex.Study(sys.argv[1], response="thickness_um", factors="nozzle")
        study.save(sys.argv[2])
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
        resource.setrlimit(resource.RLIMIT_FSIZE, (1000, 1000))
        study.drop([6], reason="x" * 5000)
        try:
            study.save(sys.argv[2])
        except ex.OutputError as exc:
            print("refused:", exc)
    """)
    path = tmp_path / "s.study.json"
    proc = subprocess.run([sys.executable, "-c", script, str(data), str(path)], capture_output=True, text=True,
                          timeout=120, env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert "refused:" in proc.stdout and "File too large" in proc.stdout, proc.stderr
    assert ex.Study.load(path, data).edits == ()  # the first save, whole
    assert _leftovers(tmp_path) == []
