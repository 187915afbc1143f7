"""An export killed at any moment leaves the old file or the complete new one.

Real ``python -m scalesieve clean ... --force`` processes are killed with
SIGKILL at random delays (export_kills.py); after each, the target must be
byte-identical to the old file or to an export that ran to its end, stray
files must be our named temporary files, and the next finished export must
remove them.  40 kills here; ``python tests/robustness/export_kills.py
--kills 500`` runs more on demand.
"""

from __future__ import annotations

import json
import os
import signal

import pytest

import export_kills

KILLS = int(os.environ.get("SCALESIEVE_KILLS", "40"))


@pytest.mark.skipif(not hasattr(signal, "SIGKILL"), reason="needs SIGKILL (POSIX)")
def test_killed_exports_leave_old_or_complete_new_file(tmp_path):
    # A shorter recording and one reference run keep this inside the CI budget.
    summary = export_kills.run_kills(str(tmp_path), KILLS, seed=1, frames=100_000,
                                     reference_runs=1)
    text = json.dumps(summary)
    print(text)
    assert summary["kills"] == KILLS, text
    assert summary["old_file"] + summary["new_file"] + summary["torn"] == summary["trials"], text
    assert summary["torn"] == 0, text
    assert summary["foreign_files"] == 0, text
    assert summary["leftovers_after_clean_exports"] == [], text
    assert summary["input_unchanged"] and summary["final_files_complete"], text


def test_stale_temporaries_are_removed_only_when_their_writer_is_gone(tmp_path):
    from scalesieve.io import atomic

    target = tmp_path / "report.json"
    target.write_text("{}")
    host = atomic._host_tag()
    dead = tmp_path / f".report{atomic.TEMP_MARK}999999999.{host}-abc.json"   # no such pid
    live = tmp_path / f".report{atomic.TEMP_MARK}{os.getppid()}.{host}-def.json"
    other_host = tmp_path / f".report{atomic.TEMP_MARK}999999999.000000-ghi.json"
    not_ours = tmp_path / ".report.json.swp"
    for p in (dead, live, other_host, not_ours):
        p.write_text("partial")
    removed = atomic.remove_stale_temporaries(target)
    assert removed == [str(dead)]
    assert live.exists() and other_host.exists() and not_ours.exists()
    # And a real write sweeps the same way before it starts.
    dead.write_text("partial")
    atomic.atomic_write(target, lambda tmp: open(tmp, "w").write('{"a": 1}'), force=True)
    assert not dead.exists() and target.read_text() == '{"a": 1}'
