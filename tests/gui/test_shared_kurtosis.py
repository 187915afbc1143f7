"""The Impulse map and the envelope pane's "best" share one kurtosis table."""

from __future__ import annotations

import threading

import numpy as np

from scalesieve.core import envelope as en
from scalesieve.core import impulsive_bands as ib
from scalesieve.gui import shared_kurtosis


class _Rec:
    """Stands for a recording: only its identity matters here."""


def _signal():
    rng = np.random.default_rng(2)
    x = rng.normal(0.0, 0.01, 1 << 14)
    x[::997] += 0.5                      # invented impacts
    return x


def test_two_askers_get_one_table_made_once(monkeypatch):
    shared_kurtosis.forget()
    made = []
    real = ib.table
    gate = threading.Event()

    def counted(*a, **k):
        made.append(1)
        gate.wait(5)                     # the second asker comes while the first works
        return real(*a, **k)

    monkeypatch.setattr(ib, "table", counted)
    rec, x = _Rec(), _signal()
    out = []
    threads = [threading.Thread(target=lambda: out.append(shared_kurtosis.table(
        rec, 0, x, 1000.0, "db4", "symmetric", 5))) for _ in range(2)]
    for t in threads:
        t.start()
    gate.set()
    for t in threads:
        t.join(10)
    assert len(made) == 1 and len(out) == 2 and out[0] is out[1]
    other = shared_kurtosis.table(rec, 0, x, 1000.0, "db4", "symmetric", 4)   # another depth
    assert len(made) == 2 and len(other["levels"]) == 4
    shared_kurtosis.forget()


def test_a_stopped_maker_leaves_the_table_to_the_next_asker():
    shared_kurtosis.forget()
    rec, x = _Rec(), _signal()

    def stop():
        raise RuntimeError("stopped")

    try:
        shared_kurtosis.table(rec, 0, x, 1000.0, "db4", "symmetric", 5, check=stop)
    except RuntimeError:
        pass
    t = shared_kurtosis.table(rec, 0, x, 1000.0, "db4", "symmetric", 5)
    assert t["best"] == ib.table(x, 1000.0, "db4", "symmetric", 5)["best"]
    shared_kurtosis.forget()


def test_envelope_of_best_from_a_given_table_is_the_same_report():
    x = _signal()
    t = ib.table(x, 1000.0, "db4", "symmetric", 5, keep_best=True)
    given = en.report(x, 1000.0, "best", "db4", "symmetric", 5, table=t)
    own = en.report(x, 1000.0, "best", "db4", "symmetric", 5)
    assert "best_coefficients" in t                      # read, not changed
    assert given["band"] == own["band"] and given["peaks"] == own["peaks"]
    assert np.array_equal(given["amplitude"], own["amplitude"])
    assert given["kurtosis"]["best"] == own["kurtosis"]["best"]
    assert "best_coefficients" not in given["kurtosis"]
