"""docs/vocabulary.md is the one vocabulary: CLI options, JSON keys and window labels use it."""

import ast
import glob
import json
import os
import re
import subprocess
import sys

import pytest

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), ".."))
PAGE = open(os.path.join(ROOT, "docs", "vocabulary.md"), encoding="utf-8").read()
SAMPLES = os.path.join(ROOT, "sample_signals")


def _rows():
    rows = []
    for line in PAGE.splitlines():
        if line.startswith("| ") and not line.startswith("| term") and "---" not in line:
            cells = [c.strip() for c in re.split(r"(?<!\\)\|", line)[1:-1]]
            rows.append(cells)
    return rows


ROWS = _rows()
WORDS = set(re.findall(r"`([^`]+)`", PAGE))
TOKENS = {t for w in WORDS for t in re.findall(r"--?[a-z][a-z-]*|[a-z_]+[a-z0-9_]*", w)}


def test_the_page_has_a_row_per_term_with_every_column():
    assert len(ROWS) >= 30
    assert all(len(r) == 6 and r[0] and r[1] for r in ROWS)


def test_every_command_line_option_is_a_vocabulary_word():
    from scalesieve import cli

    missing = []
    for command in (None, *cli.COMMANDS):
        parser, _ = cli.build_parser(command)
        for action in parser._actions:      # reading argparse's list, not writing it
            for opt in action.option_strings:
                if opt.startswith("--") and opt not in TOKENS:
                    missing.append(f"{command or 'window'} {opt}")
    assert not missing, missing


def _keys(obj, into):
    if isinstance(obj, dict):
        for k, v in obj.items():
            into.add(k)
            _keys(v, into)
    elif isinstance(obj, list):
        for v in obj:
            _keys(v, into)


RUNS = [
    ["bands", "pump_bearing.wav", "--json"],
    ["bands", "pump_bearing.wav", "--json", "--transform", "packet", "--level", "3"],
    ["events", "pump_bearing.wav", "--json"],
    ["events", "rig_strain_logger.csv", "--json"],
    ["kurtosis", "fan_bearing.wav", "--json", "--level", "3"],
    ["envelope", "fan_bearing.wav", "--band", "best", "--level", "3", "--bearing",
     "10,8.0,42.0,0", "--shaft", "29.5", "--json"],
]


@pytest.mark.parametrize("run", RUNS, ids=lambda r: " ".join(r[:2]))
def test_every_json_key_is_a_vocabulary_word(run):
    r = subprocess.run([sys.executable, "-m", "scalesieve", run[0], os.path.join(SAMPLES, run[1]),
                        *run[2:]], capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    keys: set = set()
    _keys(json.loads(r.stdout), keys)
    assert keys - TOKENS == set()


def test_batch_report_and_recipe_keys_are_vocabulary_words(tmp_path):
    from scalesieve import batch
    from scalesieve.recipe import Edit, Recipe

    recipe = Recipe(None, (Edit("gain", levels=(1,), gain=0.0),
                           Edit("threshold", levels="details", rule="manual", value=0.1),
                           Edit("region", levels=(2,), start_s=0.1, stop_s=0.2)))
    report = batch.run_batch([os.path.join(SAMPLES, "pump_bearing.wav")], str(tmp_path / "out"),
                             recipe, workers=1)
    keys: set = set()
    _keys(report, keys)
    _keys(recipe.to_json(), keys)
    keys -= set(report["versions"])        # library names, listed under "versions" anyway
    assert keys - TOKENS == set()


def _gui_strings() -> str:
    found = []
    for path in glob.glob(os.path.join(ROOT, "app", "scalesieve", "gui", "*.py")) + \
            glob.glob(os.path.join(ROOT, "app", "scalesieve", "views", "*.py")):
        tree = ast.parse(open(path, encoding="utf-8").read())
        found += [n.value for n in ast.walk(tree)
                  if isinstance(n, ast.Constant) and isinstance(n.value, str)]
    return "\n".join(found).lower().replace("&", "")


def test_window_labels_named_on_the_page_are_the_windows_own():
    strings = _gui_strings()
    missing = []
    for row in ROWS:
        for label in (x.strip() for x in row[5].split(",")):
            if not label:
                continue
            for part in (p.strip() for p in label.split("›")):
                if part.lower() not in strings:
                    missing.append(part)
    assert not missing, missing


def test_window_labels_do_not_use_a_retired_word_for_muting():
    # 'zero' is the older command-line spelling of mute; the window says mute (or -inf dB)
    strings = _gui_strings()
    assert not re.search(r"\bzero (this|the) band", strings)
    assert "mute" in strings
