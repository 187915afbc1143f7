"""The README's promises: its two commands and its API example."""

import os
import re
import shutil

import pytest

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), ".."))
README = open(os.path.join(ROOT, "README.md"), encoding="utf-8").read()


def test_readme_starts_with_the_job_then_two_commands():
    first, rest = README.split("\n\n", 1)
    assert "wavelet" in first and "\n" not in first.strip()
    block = re.search(r"```\n(.*?)```", rest, re.S).group(1).strip().splitlines()
    assert len(block) == 2
    assert block[0].rstrip().endswith("scalesieve")
    assert "python -m pytest tests" in block[1]
    # CI runs the same test command
    ci = open(os.path.join(ROOT, ".ci", "run"), encoding="utf-8").read()
    assert block[1].split("&&")[1].strip() in ci


def test_readme_api_example_runs(tmp_path, monkeypatch):
    code = re.search(r"```python\n(.*?)```", README, re.S).group(1)
    shutil.copytree(os.path.join(ROOT, "sample_signals"), tmp_path / "sample_signals")
    monkeypatch.chdir(tmp_path)
    exec(compile(code, "README.md", "exec"), {})
    assert (tmp_path / "pump_clean.wav").exists()
    from scalesieve import recipe

    r = recipe.load(str(tmp_path / "pump_recipe.json"))
    assert [e.op for e in r.edits] == ["threshold", "gain"]
    assert r.transform.wavelet == "db8"


def _command_blocks():
    """The README's blocks of `scalesieve COMMAND ...` lines (the window's own lines aside)."""
    blocks = re.findall(r"```\n(.*?)```", README, re.S)
    lines = []
    for block in blocks:
        rows = [r for r in block.strip().splitlines() if r.strip()]
        if rows and all(r.startswith("scalesieve ") for r in rows):
            lines += rows
    return lines


def test_readme_has_its_command_examples():
    lines = _command_blocks()
    assert len(lines) >= 10 and any(" batch " in r for r in lines)


def test_every_readme_command_runs_as_typed_in_a_fresh_clone(tmp_path):
    # A clone holds what git tracks: copy the tracked sample recordings, nothing made later.
    import subprocess
    import sys

    tracked = subprocess.run(["git", "-C", ROOT, "ls-files", "sample_signals", "docs/recipes"],
                             capture_output=True, text=True)
    names = tracked.stdout.split() if tracked.returncode == 0 and tracked.stdout.strip() else \
        [os.path.relpath(os.path.join(d, f), ROOT)
         for d, _, fs in os.walk(os.path.join(ROOT, "sample_signals")) for f in fs]
    for name in names:
        os.makedirs(tmp_path / os.path.dirname(name), exist_ok=True)
        shutil.copy(os.path.join(ROOT, name), tmp_path / name)
    env = dict(os.environ, PATH=os.path.dirname(sys.executable) + os.pathsep
               + os.environ.get("PATH", ""))
    for line in _command_blocks():
        if line.split()[1].startswith("sample_signals/") or line.split()[1] == "--snapshot":
            continue                           # the window's own lines
        r = subprocess.run(line, shell=True, cwd=tmp_path, env=env, capture_output=True,
                           text=True, timeout=600)
        assert r.returncode == 0, f"{line}\n{r.stderr}"
        assert "Traceback" not in r.stderr, line
    # what the examples promise to leave behind
    for made in ("pump_clean.wav", "fan_clean.wav", "my_recipe.json", "pump_events.csv",
                 "cleaned/batch-report.json", "cleaned/pump_bearing.wav",
                 "cleaned/fan_bearing.wav", "mic_clean.flac", "mic_removed.flac"):
        assert (tmp_path / made).exists(), made
