"""--fill-gaps linear on a text table in blocks: the whole-file reader's samples and warnings.

Outside references: the whole-file reader (``io.csv_reader.read_text``, itself tested
against ``numpy.interp`` and Python's ``csv`` module in tests/io) gives the samples, rate,
warnings and filled count a table read in blocks must give, bit for bit; Python's ``csv``
module writes the tables.
"""

import csv

import numpy as np
import pytest

from scalesieve import memory_guard
from scalesieve.cli import main
from scalesieve.errors import ScalesieveError
from scalesieve.io.csv_reader import read_text
from scalesieve.stream import text_source as ts


@pytest.fixture(autouse=True)
def small_chunks(monkeypatch):
    # a few hundred bytes parsed and a few hundred rows checked at a time: every gap,
    # jump and long run below crosses block boundaries
    monkeypatch.setattr(ts, "CHUNK_BYTES", 613)
    monkeypatch.setattr(ts, "CHECK_ROWS", 389)


def _table(path, n=4000, step=0.002, seed=3, holes=(), jumps=None, time_holes=(), unit="s",
           channels=2):
    """A logger's table (Python's csv module writes it): channels with empty cells at
    ``holes`` ((row, column) or (start, stop, column) runs), the clock jumping forward by
    ``jumps`` ({row: seconds}) and empty time cells at ``time_holes``."""
    rng = np.random.default_rng(seed)
    x = np.round(rng.standard_normal((n, channels)) + np.linspace(0, 2, n)[:, None], 6)
    cells = [[f"{v:.6f}" for v in row] for row in x]
    for h in holes:
        rows = range(h[0], h[1]) if len(h) == 3 else [h[0]]
        for r in rows:
            cells[r][h[-1]] = ""
    t, shift = [], 0.0
    for i in range(n):
        shift += (jumps or {}).get(i, 0.0)
        t.append(i * step + shift)
    scale = 1000.0 if unit == "ms" else 1.0
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow([f"time [{unit}]"] + [f"ch {k}" for k in range(channels)])
        for i in range(n):
            w.writerow(["" if i in time_holes else f"{t[i] * scale:.6f}"] + cells[i])
    return str(path)


def _same(path, **kw):
    src = ts.TextSource(path, fill_gaps="linear", **kw)
    rec = read_text(path, fill_gaps="linear", **kw)
    got = np.concatenate(list(src.blocks(frames=211)))
    assert src.frames == rec.n and src.rate == rec.rate
    np.testing.assert_array_equal(got, rec.samples)           # bit for bit
    assert src.warnings() == list(rec.warnings)
    assert src.filled == rec.meta["filled_gaps"]
    assert src.names == rec.channel_names
    return src, rec


def test_empty_cells_are_filled_as_the_whole_file_reader_fills_them(tmp_path):
    # single cells, a run longer than a block (held until its next value), runs at the
    # start and the end of a column, in both channels
    path = _table(tmp_path / "holes.csv", holes=[(7, 0), (388, 1), (389, 1), (500, 1400, 0),
                                                 (0, 30, 1), (3950, 4000, 0), (2222, 1)])
    src, rec = _same(path)
    assert src.filled == 1 + 2 + 900 + 30 + 50 + 1 and not src.warnings()


def test_clock_jumps_become_rows_with_the_whole_file_readers_warnings(tmp_path):
    # jumps inside a block, at a block's first row, one longer than a block (chunked
    # interpolation), and empty time cells filled before the clock is read
    jumps = {400: 0.010, 389 * 3: 0.004, 2500: 1.5, 3001: 0.0061}
    path = _table(tmp_path / "jumps.csv", jumps=jumps, time_holes={50, 51, 1800},
                  holes=[(2499, 0), (2500, 1), (100, 200, 1)])
    src, rec = _same(path)
    assert len(src.warnings()) == 4 and "filled 750 samples" in src.warnings()[2]
    # 0.0061 s is not a whole number of 2 ms steps: the reader says later samples shift
    assert "not a whole number of steps" in src.warnings()[3]
    _same(path, channel=1)
    _same(path, rate=500.0)       # the rate given: the clock is not read, nothing added


def test_a_clock_in_milliseconds_with_a_jump(tmp_path):
    path = _table(tmp_path / "ms.csv", unit="ms", jumps={1000: 0.02}, channels=1,
                  holes=[(999, 0), (1000, 0)])
    _same(path)


def _both_refuse(path, **kw):
    with pytest.raises(ScalesieveError) as whole:
        read_text(path, fill_gaps="linear", **kw)
    with pytest.raises(ScalesieveError) as blocks:
        ts.TextSource(path, fill_gaps="linear", **kw)
    assert (str(blocks.value), blocks.value.line) == (str(whole.value), whole.value.line)
    return blocks.value


def test_tables_that_cannot_be_filled_give_the_whole_file_readers_one_line(tmp_path):
    empty = _both_refuse(_table(tmp_path / "empty.csv", holes=[(0, 4000, 1)]))
    assert "holds no values to fill gaps from" in str(empty)
    # an infinite value is named before any empty cell is filled
    path = tmp_path / "inf.csv"
    text = open(_table(tmp_path / "base.csv", holes=[(5, 0)])).read().splitlines()
    text[3001] = text[3001].rsplit(",", 1)[0] + ",inf"
    path.write_text("\n".join(text) + "\n")
    assert "infinite" in str(_both_refuse(str(path)))
    # too many rows to make up
    from scalesieve.io import time_column as tc

    big = _table(tmp_path / "far.csv", jumps={2000: 300.0})
    import unittest.mock as um

    with um.patch.object(tc, "MOST_FILLED", 1000):
        assert "split the file at the jumps" in str(_both_refuse(big))


def test_clean_in_blocks_with_fill_gaps_writes_the_whole_files_samples(tmp_path, monkeypatch,
                                                                       capsys):
    path = _table(tmp_path / "log.csv", n=20_000, jumps={7000: 0.05, 15000: 0.3},
                  holes=[(10, 0), (3000, 3500, 1)])
    whole, blocks = tmp_path / "whole.csv", tmp_path / "blocks.csv"
    args = ["--zero", "1", "--fill-gaps", "linear"]
    assert main(["clean", path, "-o", str(whole)] + args) == 0
    said_whole = capsys.readouterr().err
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    assert main(["clean", path, "-o", str(blocks)] + args) == 0
    said = capsys.readouterr().err
    assert "parsed in chunks into a temporary file, then cleaned in blocks" in said
    for line in said_whole.splitlines():
        if "the clock jumps" in line:
            assert line in said
    a = np.loadtxt(whole, delimiter=",", skiprows=1)
    b = np.loadtxt(blocks, delimiter=",", skiprows=1)
    assert a.shape == b.shape == (20_000 + 25 + 150, 3)
    np.testing.assert_allclose(b, a, rtol=0, atol=1e-11 * np.abs(a).max())
