"""The README runs: every Python block, in order, in one interpreter, in a temporary folder holding
a copy of the demo data; then its command-line lines (``.venv/bin/variance-explorer ...``) the same
way, through this interpreter (``python -m explorer`` is the same program). Lines that start a
server (``demo``, ``app``) are checked with ``--dry-run`` only."""

from __future__ import annotations

import os
import re
import shlex
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
README = ROOT / "README.md"
VENV_CLI = ".venv/bin/variance-explorer"


def _fenced() -> list[tuple[str, str]]:
    """(info string, text) of every fenced block of the README, in order."""
    blocks, info, lines = [], None, []
    for line in README.read_text(encoding="utf-8").splitlines():
        if line.startswith("```"):
            if info is None:
                info, lines = line[3:].strip(), []
            else:
                blocks.append((info, "\n".join(lines) + "\n"))
                info = None
        elif info is not None:
            lines.append(line)
    return blocks


def _blocks(kind: str) -> list[str]:
    return [text for info, text in _fenced() if info == kind]


def _cli_lines() -> list[str]:
    out = []
    for info, block in _fenced():
        if info in ("", "sh", "bash", "shell", "console"):
            for line in block.splitlines():
                line = line.split("  # ")[0].strip()
                if line.startswith(VENV_CLI):
                    out.append(line)
    return out


@pytest.fixture
def folder(tmp_path: Path) -> Path:
    shutil.copytree(ROOT / "data", tmp_path / "data")
    return tmp_path


def test_every_python_block_runs_in_order(folder: Path):
    blocks = _blocks("python")
    assert len(blocks) >= 5
    script = "\n\n".join(f"# --- README block {i + 1}\n{b}" for i, b in enumerate(blocks))
    (folder / "readme_blocks.py").write_text(script, encoding="utf-8")
    env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""), "MPLBACKEND": "Agg"}
    done = subprocess.run([sys.executable, "readme_blocks.py"], cwd=folder, env=env, capture_output=True, text=True,
                          timeout=900)
    assert done.returncode == 0, f"README Python failed:\n{done.stdout[-3000:]}\n{done.stderr[-3000:]}"
    assert (folder / "coating.study.json").exists() and (folder / "coating-report.html").exists()


def test_shell_lines_use_the_virtual_environment_and_run(folder: Path):
    lines = _cli_lines()
    assert any(" check " in f" {ln} " for ln in lines) and any(" report " in f" {ln} " for ln in lines)
    text = README.read_text(encoding="utf-8")
    bare = [ln for ln in re.findall(r"^variance-explorer .*$", text, flags=re.M)]
    assert not bare, f"shell lines must use {VENV_CLI} (the set-up commands create .venv): {bare}"
    env = {**os.environ, "PYTHONPATH": str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", "")}
    # the study file the report and app lines read comes from the README's Python
    setup = ("import explorer as ex\ns = ex.Study('data/coating_thickness.csv', 'thickness_um', 'nozzle', "
             "id_column='panel')\ns.drop(['P1007'], reason='gauge slip')\ns.save('coating.study.json')\n")
    subprocess.run([sys.executable, "-c", setup], cwd=folder, env=env, check=True, timeout=300)
    for line in lines:
        args = shlex.split(line)[1:]
        if args[0] in ("demo", "app"):
            args.append("--dry-run")
        done = subprocess.run([sys.executable, "-m", "explorer", *args], cwd=folder, env=env, capture_output=True,
                              text=True, timeout=600)
        assert done.returncode == 0, f"{line}\n{done.stdout[-2000:]}\n{done.stderr[-2000:]}"
        if args[0] == "check":
            assert "--id-column" in args, "the check example names its id column"
