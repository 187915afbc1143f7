"""Text tables in blocks: parsed in chunks by the whole-file reader's rules, cleaned in blocks.

Outside references: Python's ``csv`` module reads the tables we write (values, header),
PyWavelets on the whole array gives the cleaned samples and band figures; the whole-file
reader (``io.csv_reader.read_text``, itself tested against ``csv`` in tests/io) gives the
same samples, rate, names and the same one-line messages for bad tables.
"""

import csv
import json
import os

import numpy as np
import pytest
import pywt

from scalesieve import memory_guard
from scalesieve.batch import clean_file
from scalesieve.cli import main
from scalesieve.core.transforms import TransformSpec
from scalesieve.errors import ScalesieveError
from scalesieve.io.csv_reader import read_text
from scalesieve.recipe import Edit
from scalesieve.stream import text_source as ts
from scalesieve.stream.bands import band_figures_stream
from scalesieve.stream.pipeline import clean_stream

from test_stream_bands import _figures  # the whole-array PyWavelets references
from test_stream_clean import _visushrink

from killed_export import clean_command, first_run, kill_while_writing, run_again


@pytest.fixture(autouse=True)
def small_chunks(monkeypatch):
    # chunks of a few hundred bytes and checks of a few hundred rows: a table of some
    # thousand rows crosses every boundary many times
    monkeypatch.setattr(ts, "CHUNK_BYTES", 613)
    monkeypatch.setattr(ts, "CHECK_ROWS", 389)


def _write(path, text, encoding="utf-8", newline="\n"):
    with open(path, "w", encoding=encoding, newline="") as f:
        f.write(text.replace("\n", newline))


def _logger_table(n, channels=3, seed=0, decimal=",", sep=";", unit="ms", step=0.5):
    """A strain logger's export: comments, a time column in ms, decimal comma."""
    rng = np.random.default_rng(seed)
    x = np.round(rng.standard_normal((n, channels)) + np.linspace(0, 3, n)[:, None], 6)
    lines = ["# rig 4, strain gauges, exported 2026-11-30",
             sep.join([f"time [{unit}]"] + [f"gauge {k + 1} [µm/m]" for k in range(channels)])]
    for i in range(n):
        cells = [f"{i * step:.3f}"] + [f"{v:.6f}" for v in x[i]]
        lines.append(sep.join(c.replace(".", decimal) for c in cells))
        if i == n // 2:
            lines.append("# gauge 2 re-zeroed here")
    return "\n".join(lines) + "\n", x


def _same_source(path, **kw):
    src = ts.TextSource(str(path), **{k: v for k, v in kw.items()})
    rec = read_text(str(path), **kw)
    got = np.concatenate(list(src.blocks(frames=211)))
    assert src.frames == rec.n and src.rate == rec.rate
    assert src.names == rec.channel_names
    assert src.start_time == rec.start_time
    np.testing.assert_array_equal(got, rec.samples)           # bit for bit
    return src, rec


TABLES = {
    "semicolon, decimal comma, ms, CRLF": (lambda: _logger_table(2001), "utf-8", "\r\n"),
    "comma, seconds, LF": (lambda: _logger_table(1777, 2, 1, ".", ",", "s", 0.001),
                           "utf-8", "\n"),
    "tab, Latin-1 header": (lambda: _logger_table(1500, 2, 2, ".", "\t"), "latin-1", "\n"),
    "UTF-16 with BOM, CR line ends": (lambda: _logger_table(999, 1, 3), "utf-16", "\r"),
    "UTF-8 BOM": (lambda: _logger_table(1201, 2, 4, ".", ","), "utf-8-sig", "\n"),
}


@pytest.mark.parametrize("name", sorted(TABLES))
def test_a_table_in_chunks_is_what_the_whole_file_reader_reads(tmp_path, name):
    make, encoding, newline = TABLES[name]
    text, x = make()
    path = tmp_path / "log.csv"
    _write(path, text, encoding, newline)
    src, rec = _same_source(path)
    # outside reference: Python's csv module on the same file (values as written)
    delim = ";" if ";" in text.splitlines()[1] else "\t" if "\t" in text else ","
    with open(path, encoding="utf-16" if encoding == "utf-16" else encoding,
              newline="") as f:
        rows = [r for r in csv.reader(f, delimiter=delim) if r and not r[0].startswith("#")]
    assert rows[0][1:] == src.names
    want = np.array([[float(c.replace(",", ".")) for c in r[1:]] for r in rows[1:]])
    np.testing.assert_array_equal(np.concatenate(list(src.blocks())), want)
    # the clock: 0.5 ms steps (2000 Hz), or 1 ms in seconds (1000 Hz)
    assert src.rate == (1000.0 if "seconds" in name else 2000.0)
    # one channel by name, and a stretch read from the middle (the SWT and wrap seek)
    one = ts.TextSource(str(path), channel=src.names[-1])
    np.testing.assert_array_equal(np.concatenate(list(one.blocks(frames=100, start=37,
                                                                  stop=900))),
                                  rec.samples[37:900, -1:])


def test_timestamps_clock_times_and_no_header_read_alike(tmp_path):
    from datetime import datetime, timedelta, timezone

    n = 1300
    x = np.round(np.random.default_rng(7).standard_normal(n), 5)
    t0 = datetime(2026, 3, 1, 23, 59, 55, tzinfo=timezone(timedelta(hours=1)))
    iso = "timestamp,accel\n" + "".join(
        f"{(t0 + timedelta(milliseconds=10 * i)).isoformat(timespec='milliseconds')},{x[i]}\n"
        for i in range(n))
    _write(tmp_path / "iso.csv", iso)
    src, rec = _same_source(tmp_path / "iso.csv")
    assert src.start_time == t0 and src.rate == 100.0 and src.clock == rec.meta["clock"]

    def clock(s):
        s = round(s, 3) % 86400
        return f"{int(s // 3600):02d}:{int(s % 3600 // 60):02d}:{s % 60:06.3f}"
    # an elapsed clock running past midnight (row 600): carried on across the chunks
    _write(tmp_path / "clock.txt", "".join(f"{clock(86340 + 0.1 * i)}  {x[i]}\n"
                                           for i in range(n)))
    src, rec = _same_source(tmp_path / "clock.txt")
    assert src.rate == 10.0
    # no header, whitespace, the rate given
    plain = "".join(f"{a} {b}\n" for a, b in zip(x, x[::-1]))
    _write(tmp_path / "plain.dat", plain)
    _same_source(tmp_path / "plain.dat", rate=250.0)


def _bad(tmp_path, name, text, **kw):
    path = tmp_path / name
    _write(path, text)
    with pytest.raises(ScalesieveError) as whole:
        read_text(str(path), **kw)
    with pytest.raises(ScalesieveError) as blocks:
        ts.TextSource(str(path), **kw)
    assert (str(blocks.value), blocks.value.line) == (str(whole.value), whole.value.line)
    return blocks.value


def _rows(n, t=lambda i: i * 0.001, cell=lambda i, k: f"{np.sin(i + k):.5f}"):
    return "".join(f"{t(i):.6f},{cell(i, 0)},{cell(i, 1)}\n" for i in range(n))


def test_bad_tables_give_the_whole_file_readers_one_line(tmp_path):
    head = "time [s],left,right\n"
    n = 6000
    late = 5200          # past the head the layout is read from (64 K characters)

    def at(i, k, v):
        return lambda j, kk: v if (j, kk) == (i, k) else f"{np.sin(j + kk):.5f}"
    msgs = [
        _bad(tmp_path, "cell.csv", head + _rows(n, cell=at(late, 1, "12,x"))),
        _bad(tmp_path, "count.csv", head + _rows(late) + "1.0,2.0\n" + _rows(10)),
        _bad(tmp_path, "nan.csv", head + _rows(n, cell=at(late, 0, ""))),
        # an infinite value wins over an earlier empty cell, as in the whole-file reader
        _bad(tmp_path, "inf.csv", head + _rows(n, cell=lambda j, k: "" if (j, k) == (5, 0)
                                               else "inf" if (j, k) == (late, 1)
                                               else "0.5")),
        _bad(tmp_path, "big.csv", head + _rows(n, cell=at(late, 1, "1e200"))),
        _bad(tmp_path, "back.csv", head + _rows(n, t=lambda i: i * 0.001 - (i == late) * 0.5)),
        _bad(tmp_path, "jitter.csv", head + _rows(n, t=lambda i: i * 0.001 + (i == late) * 2e-4)),
        _bad(tmp_path, "jump.csv", head + _rows(n, t=lambda i: i * 0.001 + (i >= late) * 0.01)),
        _bad(tmp_path, "time-only.csv", "time [s]\n" + "".join(f"{i}\n" for i in range(50))),
        _bad(tmp_path, "no-time.csv", "left,right\n" + "1,2\n" * 50),
        _bad(tmp_path, "one-row.csv", head + "0,1,2\n"),
        _bad(tmp_path, "header-only.csv", head),
    ]
    assert all("\n" not in str(m) for m in msgs)
    # the header is line 1, data row i line i + 2 (the jitter's two steps, into and out of
    # row i, are off by about as much: round-off picks one, the same in both readers)
    assert [m.line for m in msgs[:8]] == [late + 2] * 6 + [msgs[6].line, late + 2]
    assert msgs[6].line in (late + 2, late + 3)
    assert len({str(m) for m in msgs}) == len(msgs)


def test_a_late_byte_that_is_not_utf8_makes_the_whole_table_latin1(tmp_path):
    text, _ = _logger_table(1500, 2, 5)
    lines = text.splitlines(keepends=True)
    lines[1400] = lines[1400].rstrip("\n") + "  # gauge 2: 5 \xb0C\n"
    raw = "".join(lines).encode("utf-8")
    raw = raw.replace("\xb0".encode("utf-8"), b"\xb0")         # one lone Latin-1 byte
    (tmp_path / "mixed.csv").write_bytes(raw)
    src, rec = _same_source(tmp_path / "mixed.csv")
    assert "Âµm/m" in src.names[0]                          # as the whole-file reader says it


@pytest.mark.parametrize("mode", ["symmetric", "zero", "periodic", "periodization"])
def test_a_table_is_cleaned_in_blocks_to_pywavelets_numbers(tmp_path, mode):
    text, x = _logger_table(4099, 2, 8, ".", ",")
    path = tmp_path / "log.csv"
    _write(path, text)
    out = tmp_path / "clean.csv"
    res = clean_stream(str(path), str(out), transform=TransformSpec("dwt", "db4", 5, mode),
                       edits=[Edit("threshold", levels="details", rule="universal",
                                   shape="soft", noise="finest")])
    assert res["blocks"]["table_parsed"] and res["rate"] == 2000.0
    with open(out, newline="") as f:                 # read back with Python's csv module
        rows = list(csv.reader(f))
    assert rows[0] == ["time_s", "gauge 1 [µm/m]", "gauge 2 [µm/m]"]
    y = np.array(rows[1:], dtype=float)
    np.testing.assert_array_equal(y[:, 0], np.arange(4099) / 2000.0)
    for k in range(2):
        want = _visushrink(x[:, k], "db4", 5, mode)
        np.testing.assert_allclose(y[:, k + 1], want, rtol=0, atol=1e-12 * np.abs(want).max())


@pytest.mark.parametrize("kind, mode", [("dwt", "symmetric"), ("dwt", "periodization"),
                                        ("swt", "smooth")])
def test_whole_and_in_blocks_give_one_file(tmp_path, kind, mode):
    # the CONTRACT: the same numbers either way; a clock column carried into the output
    n = 3001
    x = np.round(np.random.default_rng(9).standard_normal((n, 2)), 6)
    text = "timestamp,a,b\n" + "".join(
        f"2026-11-30 08:{i // 6000:02d}:{i % 6000 // 100:02d}.{i % 100:02d}0,"
        f"{x[i, 0]:.6f},{x[i, 1]:.6f}\n" for i in range(n))
    path = tmp_path / "clock.csv"
    _write(path, text)
    spec = TransformSpec(kind, "sym4", 4, mode)
    edits = [Edit("threshold", levels="details", rule="bayes", shape="soft", noise="level"),
             Edit("region", levels=(1, 2), start_s=3.0, stop_s=9.5, gain=0.0)]
    a, b = tmp_path / "a.csv", tmp_path / "b.csv"
    clean_file(str(path), str(a), transform=spec, edits=edits, removed=str(tmp_path / "ar.wav"))
    clean_stream(str(path), str(b), transform=spec, edits=edits,
                 removed=str(tmp_path / "br.wav"))
    ta, tb = a.read_text().splitlines(), b.read_text().splitlines()
    assert ta[0] == tb[0] == "timestamp,a,b" and len(ta) == len(tb) == n + 1
    assert [r.split(",")[0] for r in ta] == [r.split(",")[0] for r in tb]
    u = np.array([r.split(",")[1:] for r in ta[1:]], dtype=float)
    v = np.array([r.split(",")[1:] for r in tb[1:]], dtype=float)
    np.testing.assert_allclose(v, u, rtol=0, atol=1e-11 * np.abs(u).max())
    import soundfile as sf

    ra, rb = sf.read(tmp_path / "ar.wav")[0], sf.read(tmp_path / "br.wav")[0]
    np.testing.assert_allclose(rb, ra, rtol=0, atol=1e-6)            # 32-bit float WAV
    assert sf.info(tmp_path / "br.wav").subtype == "FLOAT"


def test_band_figures_of_a_table_in_blocks_are_the_whole_array_ones(tmp_path):
    text, x = _logger_table(5003, 2, 11)
    path = tmp_path / "log.csv"
    _write(path, text, newline="\r\n")
    for mode in ("reflect", "periodization"):
        facts, channels = band_figures_stream(str(path), TransformSpec("dwt", "db3", 6, mode))
        assert facts["names"] == ["gauge 1 [µm/m]", "gauge 2 [µm/m]"]
        for k, rows in enumerate(channels):
            want = _figures(x[:, k], "db3", 6, mode)
            for r in rows:
                for field in ("energy", "rms", "peak", "coef_energy", "kurtosis"):
                    assert r[field] == pytest.approx(want[r["name"]][field], rel=1e-9)


def test_the_commands_take_a_long_table_in_blocks_and_say_so(tmp_path, monkeypatch, capsys):
    text, x = _logger_table(20_011, 3, 12)
    path = tmp_path / "log.csv"
    _write(path, text)
    whole = {}
    for cmd in (["bands", str(path), "--json", "--level", "5"],
                ["events", str(path), "--json", "--channel", "gauge 2 [µm/m]", "--k", "3"]):
        assert main(cmd) == 0
        whole[cmd[0]] = json.loads(capsys.readouterr().out)
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    for cmd in (["bands", str(path), "--json", "--level", "5"],
                ["events", str(path), "--json", "--channel", "gauge 2 [µm/m]", "--k", "3"]):
        assert main(cmd) == 0
        captured = capsys.readouterr()
        assert "parsed in chunks into a temporary file" in captured.err
        got = json.loads(captured.out)
        want = whole[cmd[0]]
        if cmd[0] == "events":
            assert got == want                       # events identical
            assert got["channels"] == [{"index": 1, "name": "gauge 2 [µm/m]"}]
            continue
        assert got["samples"] == want["samples"] and got["rate"] == want["rate"]
        for cg, cw in zip(got["channels"], want["channels"]):
            assert (cg["index"], cg["name"]) == (cw["index"], cw["name"])
            for bg, bw in zip(cg["bands"], cw["bands"]):
                assert bg["name"] == bw["name"]
                assert bg["energy"] == pytest.approx(bw["energy"], rel=1e-9)
    out = tmp_path / "out.csv"
    assert main(["clean", str(path), "-o", str(out), "--zero", "1"]) == 0
    assert "parsed in chunks into a temporary file, then cleaned in blocks" in \
        capsys.readouterr().err
    assert main(["clean", str(path), "-o", str(tmp_path / "w.csv"), "--zero", "1",
                 "--workers", "2"]) == 2
    assert "a text table is parsed in one process only" in capsys.readouterr().err


def test_a_bad_table_in_blocks_is_one_line_and_no_output(tmp_path, monkeypatch, capsys):
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 16)
    path = tmp_path / "log.csv"
    _write(path, "t,x\n" + "".join(f"{i / 100},{i % 7}\n" for i in range(20_000))
           + "200.0,oops\n")
    assert main(["clean", str(path), "-o", str(tmp_path / "out.wav"), "--zero", "1"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert err == [f"scalesieve: error: {path}: line 20002: column 2 ('x'): cell 'oops' is not a "
                   "number"]
    assert sorted(os.listdir(tmp_path)) == ["log.csv"]


def test_a_killed_clean_of_a_table_leaves_no_torn_file(tmp_path):
    n = 400_000
    x = np.random.default_rng(3).standard_normal(n)
    path = tmp_path / "in.csv"
    _write(path, "time [ms],x\n" + "".join(f"{i},{v:.5f}\n" for i, v in enumerate(x)))
    out = tmp_path / "out.csv"
    old = b"an older export"
    cmd = clean_command(str(path), "-o", str(out), "--force", "--threshold", "universal")
    took = first_run(cmd)
    whole = out.read_bytes()
    torn = kill_while_writing(cmd, took, out, old, tmp_path, ("in.csv", "out.csv"),
                              (0.0, 0.05, 0.2),
                              lambda: out.read_bytes() in (old, whole))  # old, or whole new
    assert torn >= 1
    run_again(cmd)
    assert out.read_bytes() == whole
    assert sorted(os.listdir(tmp_path)) == ["in.csv", "out.csv"]


def test_the_clock_median_keeps_distinct_steps_not_every_step():
    # numpy.median is the reference; a logger's steps are a handful of distinct values
    rng = np.random.default_rng(5)
    for steps in (np.full(10_001, 0.0005), 0.001 + 1e-9 * rng.integers(-3, 4, 20_000),
                  rng.random(5_001) + 0.5, np.array([0.25, 0.5])):
        m = ts._StepMedian()
        for p in range(2):
            for a in range(0, steps.size, 997):
                m.add(steps[a:a + 997])
            if p == 1:                                   # what the second pass kept
                kept = sum(u.size for parts in m.bins.wanted.values() for u, _ in parts)
                assert kept <= steps.size
                if steps.size == 10_001:
                    assert kept <= 65                    # one distinct step per merge
            m.end_pass()
        assert m.value == float(np.median(steps))


def test_the_parse_shows_on_the_progress_bar_before_the_passes(tmp_path):
    text, _ = _logger_table(3001, 1, 13)
    path = tmp_path / "log.csv"
    _write(path, text)
    told = []
    clean_stream(str(path), str(tmp_path / "out.wav"), progress=lambda f, t: told.append((f, t)),
                 edits=[Edit("threshold", levels="details", rule="universal", shape="soft")])
    fractions = [f for f, _ in told]
    assert fractions == sorted(fractions) and fractions[-1] == 1.0
    words = [t for _, t in told]
    first_pass = words.index("gathering the noise and band figures")
    assert set(words[:first_pass]) == {"parsing the table"}
    assert max(fractions[:first_pass]) <= 0.5 <= fractions[first_pass]
