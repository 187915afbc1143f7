"""`--channel K` keeps the file's own channel index K in every JSON document.

Reference: the input's header row as Python's csv module reads it (the channel's
column, less the time column), so scripts that merge per-channel results line up.
"""

import csv
import json
import os

import pytest

from scalesieve.cli import main

HERE = os.path.dirname(__file__)
LOGGER = os.path.join(HERE, "..", "..", "sample_signals", "rig_strain_logger.csv")


def _header():
    with open(LOGGER, newline="", encoding="utf-8") as fh:
        rows = [r for r in csv.reader(fh, delimiter=";") if r and not r[0].startswith("#")]
    return rows[0][1:]                    # the first column is the time column


@pytest.mark.parametrize("pick", [1, 2])
def test_bands_and_events_keep_the_file_index(pick, capsys):
    names = _header()
    assert main(["bands", LOGGER, "--channel", str(pick), "--json"]) == 0
    bands = json.loads(capsys.readouterr().out)
    assert [(c["index"], c["name"]) for c in bands["channels"]] == [(pick, names[pick])]
    assert main(["events", LOGGER, "--channel", str(pick), "--json"]) == 0
    events = json.loads(capsys.readouterr().out)
    assert [(c["index"], c["name"]) for c in events["channels"]] == [(pick, names[pick])]
    assert {n["channel"] for n in events["noise"]} == {pick}
    assert {e["channel"] for e in events["events"]} <= {pick}


def test_a_channel_chosen_by_name_keeps_its_index(capsys):
    names = _header()
    assert main(["bands", LOGGER, "--channel", names[2], "--json"]) == 0
    bands = json.loads(capsys.readouterr().out)
    assert bands["channels"][0]["index"] == 2
