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
