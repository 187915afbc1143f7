"""Text tables: dialects, header, time column, gaps and every kind of bad file.

Reference files are written with Python's ``csv`` module (the standard
library's CSV writer) wherever a dialect allows it; expected rates follow
from the time step (rate = 1 / step), and gap filling is compared with
``numpy.interp``.
"""

from __future__ import annotations

import csv

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from scalesieve.errors import ScalesieveError
from scalesieve.io.csv_reader import read_text, time_unit_of
from scalesieve.io.readers import probe, read_recording


def write_text(path, text: str, encoding: str = "utf-8", newline: str = "\n"):
    path.write_bytes(text.replace("\n", newline).encode(encoding))
    return path


def csv_module_file(path, rows, **dialect):
    """A reference file written by Python's csv module."""
    with open(path, "w", newline="", encoding="utf-8") as fh:
        csv.writer(fh, **dialect).writerows(rows)
    return path


def error_of(path, **kw) -> ScalesieveError:
    with pytest.raises(ScalesieveError) as info:
        read_recording(path, **kw)
    err = info.value
    assert err.source == str(path)
    return err


# ----------------------------------------------------------------------- dialects

def test_logger_semicolon_decimal_comma_time_in_ms(tmp_path):
    # The logger layout from the contract: semicolon, decimal comma, time in ms.
    p = write_text(tmp_path / "rig.csv",
                   "time [ms];strain_1;strain_2\n0,0;1,25;-0,5\n0,5;1,30;-0,4\n"
                   "1,0;1,35;-0,45\n1,5;1,40;-0,35\n")
    rec = read_recording(p)
    # Step 0.5 ms -> 1 / 0.0005 s = 2000 Hz.
    assert rec.rate == pytest.approx(2000.0, rel=1e-12)
    assert rec.channel_names == ["strain_1", "strain_2"]
    np.testing.assert_array_equal(rec.samples, [[1.25, -0.5], [1.30, -0.4], [1.35, -0.45],
                                                [1.40, -0.35]])
    assert rec.samples.dtype == np.float64
    assert rec.format is None and rec.subtype is None
    assert rec.meta["text"]["delimiter"] == "semicolon"
    assert rec.meta["text"]["decimal"] == ","


@pytest.mark.parametrize("delimiter", [",", ";", "\t"])
def test_csv_module_dialects_with_time_column(tmp_path, delimiter):
    rng = np.random.default_rng(7)
    data = rng.standard_normal((50, 3))
    t = np.arange(50) / 250.0
    rows = [["time_s", "x", "y", "z"]] + [[repr(ti)] + [repr(v) for v in row]
                                          for ti, row in zip(t.tolist(), data.tolist())]
    p = csv_module_file(tmp_path / "ref.csv", rows, delimiter=delimiter)
    rec = read_recording(p)
    assert rec.rate == pytest.approx(250.0, rel=1e-9)
    assert rec.channel_names == ["x", "y", "z"]
    # repr() writes the shortest text that reads back as the same float.
    np.testing.assert_array_equal(rec.samples, data)


def test_csv_module_quoting_all_cells(tmp_path):
    rows = [["t", "a,b"], ["0.0", "1.5"], ["0.1", "2.5"], ["0.2", "-3"]]
    p = csv_module_file(tmp_path / "q.csv", rows, quoting=csv.QUOTE_ALL)
    rec = read_recording(p)
    assert rec.channel_names == ["a,b"]
    np.testing.assert_array_equal(rec.samples[:, 0], [1.5, 2.5, -3.0])
    assert rec.rate == pytest.approx(10.0)


def test_tab_separated_time_in_us(tmp_path):
    p = write_text(tmp_path / "scope.tsv", "time_us\tch A\tch B\n0\t1\t2\n20\t3\t4\n40\t5\t6\n")
    rec = read_recording(p)
    # 20 us step -> 50 kHz.
    assert rec.rate == pytest.approx(50000.0, rel=1e-12)
    assert rec.channel_names == ["ch A", "ch B"]


def test_whitespace_columns_with_spaced_header_and_comments(tmp_path):
    p = write_text(tmp_path / "w.txt",
                   "# exported by a bench logger\n# second comment\n"
                   "time [s]   left    right\n"
                   "0.00    1.0   -2.0\n0.01   11.0    2.5   # inline note\n"
                   "\n0.02   -1.5    3.0\n")
    rec = read_recording(p)
    assert rec.rate == pytest.approx(100.0)
    assert rec.channel_names == ["left", "right"]
    np.testing.assert_array_equal(rec.samples, [[1.0, -2.0], [11.0, 2.5], [-1.5, 3.0]])


def test_whitespace_decimal_comma(tmp_path):
    p = write_text(tmp_path / "w.dat", "0,0 1,25 -0,5\n0,5 1,30 -0,4\n1,0 1,35 -0,45\n")
    rec = read_recording(p, rate=100.0)
    np.testing.assert_array_equal(rec.samples[:, 1], [1.25, 1.30, 1.35])
    assert rec.channels == 3


def test_single_column_with_decimal_comma_and_header(tmp_path):
    p = write_text(tmp_path / "s.csv", "strain\n1,25\n2,5\n-0,75\n")
    rec = read_recording(p, rate=10)
    assert rec.channel_names == ["strain"]
    np.testing.assert_array_equal(rec.samples[:, 0], [1.25, 2.5, -0.75])


def test_no_header_needs_rate_and_names_default(tmp_path):
    p = write_text(tmp_path / "raw.csv", "1,2,3\n4,5,6\n")
    err = error_of(p)
    assert "--rate" in err.message
    rec = read_recording(p, rate=500)
    assert rec.rate == 500.0
    assert rec.channel_names == ["ch0", "ch1", "ch2"]
    np.testing.assert_array_equal(rec.samples, [[1, 2, 3], [4, 5, 6]])


def test_header_without_time_column_needs_rate(tmp_path):
    p = write_text(tmp_path / "h.csv", "a,b\n1,2\n3,4\n")
    assert "--rate" in error_of(p).message
    assert read_recording(p, rate=8).channel_names == ["a", "b"]


def test_units_row_joins_names(tmp_path):
    p = write_text(tmp_path / "u.csv", "time;strain_1\nms;um/m\n0;1\n1;2\n2;3\n")
    rec = read_recording(p)
    assert rec.rate == pytest.approx(1000.0)
    assert rec.channel_names == ["strain_1 [um/m]"]


def test_trailing_delimiter_on_every_row(tmp_path):
    p = write_text(tmp_path / "t.csv", "t;a;b;\n0;1,5;2,5;\n1;1,6;2,6;\n")
    rec = read_recording(p)
    assert rec.channel_names == ["a", "b"]
    np.testing.assert_array_equal(rec.samples, [[1.5, 2.5], [1.6, 2.6]])


def test_bom_crlf_and_trailing_blank_lines(tmp_path):
    p = tmp_path / "win.csv"
    p.write_bytes(b"\xef\xbb\xbftime,a\r\n0,1\r\n0.5,2\r\n1,3\r\n\r\n\r\n")
    rec = read_recording(p)
    assert rec.channel_names == ["a"]  # the BOM is not part of the first name
    assert rec.rate == pytest.approx(2.0)
    np.testing.assert_array_equal(rec.samples[:, 0], [1, 2, 3])


def test_old_mac_line_ends(tmp_path):
    p = tmp_path / "cr.csv"
    p.write_bytes(b"time,a\r0,1\r1,2\r")
    assert read_recording(p).samples[:, 0].tolist() == [1.0, 2.0]


def test_latin1_header(tmp_path):
    # 0xB5 is MICRO SIGN in Latin-1 and invalid as UTF-8 on its own.
    p = tmp_path / "l1.csv"
    p.write_bytes("time [s];strain [µm/m]\n0;1\n1;2\n".encode("latin-1"))
    rec = read_recording(p)
    assert rec.channel_names == ["strain [µm/m]"]
    assert rec.meta["text"]["encoding"] == "latin-1"


def test_utf16_with_bom(tmp_path):
    p = tmp_path / "u16.txt"
    p.write_bytes("time\tx\n0\t0,5\n1\t0,25\n".encode("utf-16"))
    rec = read_recording(p)
    np.testing.assert_array_equal(rec.samples[:, 0], [0.5, 0.25])


# ---------------------------------------------------------------------- time axis

@pytest.mark.parametrize("name, scale", [
    ("time", 1.0), ("t", 1.0), ("Time [s]", 1.0), ("t (ms)", 1e-3), ("[s]", 1.0),
    ("(ms)", 1e-3), ("time_ms", 1e-3), ("time_us", 1e-6), ("Zeit [ms]", 1e-3),
    ("t / ms", 1e-3), ("time_s", 1.0), ("elapsed (µs)", 1e-6), ("Time(s)", 1.0),
])
def test_time_headers(name, scale):
    assert time_unit_of(name)[0] == scale


@pytest.mark.parametrize("name", ["strain_1", "speed [m/s]", "x", "pressure_s", "ch 1",
                                  "torque (Nm)"])
def test_not_time_headers(name):
    assert time_unit_of(name) is None


def test_time_header_with_unknown_unit_is_an_error(tmp_path):
    p = write_text(tmp_path / "x.csv", "time [fortnights],a\n0,1\n1,2\n")
    err = error_of(p)
    assert err.line == 1 and "fortnights" in err.message


def test_time_offset_kept_in_meta(tmp_path):
    p = write_text(tmp_path / "o.csv", "t,a\n10.0,1\n10.5,2\n11.0,3\n")
    rec = read_recording(p)
    assert rec.rate == pytest.approx(2.0)
    assert rec.meta["time_start_s"] == 10.0


def test_non_uniform_time_is_an_error_naming_the_line(tmp_path):
    p = write_text(tmp_path / "n.csv", "# c\nt,a\n0,1\n1,2\n2,3\n3.5,4\n4.5,5\n")
    err = error_of(p)
    assert "uniform" in err.message
    assert err.line == 6  # the row ending the 1.5 s step


def test_small_jitter_below_tolerance_is_accepted(tmp_path):
    # Spread of steps 2e-4 relative < 1e-3 (the contract's limit).
    t = np.arange(20) * 0.01
    t[5] += 0.01 * 1e-4
    rows = [["t", "a"]] + [[repr(v), "0"] for v in t.tolist()]
    p = csv_module_file(tmp_path / "j.csv", rows)
    assert read_recording(p).rate == pytest.approx(100.0, rel=1e-3)


def test_time_going_backwards_is_an_error(tmp_path):
    p = write_text(tmp_path / "b.csv", "t,a\n0,1\n1,2\n0.5,3\n")
    err = error_of(p)
    assert err.line == 4 and "increase" in err.message


def test_rate_overrides_time_column(tmp_path):
    p = write_text(tmp_path / "r.csv", "t,a\n0,1\n1,2\n3,3\n")  # not uniform
    rec = read_recording(p, rate=100)
    assert rec.rate == 100.0
    assert rec.channel_names == ["a"]


def test_time_column_alone_is_an_error(tmp_path):
    p = write_text(tmp_path / "t.csv", "time\n0\n1\n")
    assert "only a time column" in error_of(p).message


def test_single_row_with_time_needs_rate(tmp_path):
    p = write_text(tmp_path / "one.csv", "t,a\n0,1\n")
    assert "--rate" in error_of(p).message
    assert read_recording(p, rate=10).n == 1


# --------------------------------------------------------------------------- gaps

def test_empty_cell_error_names_the_file_line(tmp_path):
    p = write_text(tmp_path / "g.csv", "# header follows\n\nt,a,b\n0,1,2\n1,,3\n2,4,5\n")
    err = error_of(p)
    assert err.line == 5
    assert "--fill-gaps" in err.message and "'a'" in err.message


def test_nan_cell_error_names_the_file_line(tmp_path):
    p = write_text(tmp_path / "g.csv", "t;a\n0;1\n1;2\n2;NaN\n")
    assert error_of(p).line == 4


def test_fill_gaps_linear_matches_numpy_interp(tmp_path):
    a = [np.nan, 1.0, np.nan, np.nan, 4.0, 2.0, np.nan]
    b = [0.0, 1.0, 2.0, 3.0, np.nan, 5.0, 6.0]
    lines = ["t,a,b"] + [f"{i},{'' if np.isnan(x) else x},{'nan' if np.isnan(y) else y}"
                         for i, (x, y) in enumerate(zip(a, b))]
    p = write_text(tmp_path / "f.csv", "\n".join(lines) + "\n")
    rec = read_recording(p, fill_gaps="linear")
    idx = np.arange(len(a))
    for col, ref in enumerate((np.array(a), np.array(b))):
        ok = ~np.isnan(ref)
        expected = np.interp(idx, idx[ok], ref[ok])  # numpy.interp: the reference
        np.testing.assert_allclose(rec.samples[:, col], expected, rtol=0, atol=1e-15)
    assert rec.meta["filled_gaps"] == 5  # four in a, one in b


def test_fill_gaps_column_without_values_is_an_error(tmp_path):
    p = write_text(tmp_path / "e.csv", "t,a,b\n0,1,\n1,2,\n")
    assert "no values" in error_of(p, fill_gaps="linear").message


def test_unknown_fill_method_is_an_error(tmp_path):
    p = write_text(tmp_path / "e.csv", "t,a\n0,1\n1,2\n")
    assert "cubic" in error_of(p, fill_gaps="cubic").message


def test_infinite_cell_is_an_error(tmp_path):
    p = write_text(tmp_path / "i.csv", "t,a\n0,1\n1,inf\n")
    err = error_of(p, fill_gaps="linear")
    assert err.line == 3 and "infinite" in err.message


# -------------------------------------------------------------------- bad content

def test_non_numeric_cell_names_line_and_cell(tmp_path):
    p = write_text(tmp_path / "x.csv", "t,a,b\n0,1,2\n1,2,oops\n2,3,4\n")
    err = error_of(p)
    assert err.line == 3
    assert "'oops'" in err.message and "column 3" in err.message


def test_ragged_row_names_its_line(tmp_path):
    p = write_text(tmp_path / "r.csv", "t,a,b\n0,1,2\n1,2\n2,3,4\n")
    err = error_of(p)
    assert err.line == 3 and "expected 3" in err.message


def test_header_with_wrong_number_of_names(tmp_path):
    p = write_text(tmp_path / "h.csv", "t,a\n0,1,2\n1,2,3\n")
    err = error_of(p)
    assert err.line == 1


def test_empty_file(tmp_path):
    p = tmp_path / "empty.csv"
    p.write_bytes(b"")
    assert "empty" in error_of(p).message


def test_header_only(tmp_path):
    p = write_text(tmp_path / "h.csv", "time [s];a;b\n")
    assert "no data rows" in error_of(p).message


def test_comments_only(tmp_path):
    p = write_text(tmp_path / "c.csv", "# nothing\n\n# here\n")
    assert "no data rows" in error_of(p).message


def test_binary_junk_with_csv_extension(tmp_path):
    p = tmp_path / "junk.csv"
    p.write_bytes(bytes(range(256)) * 20)
    assert "binary" in error_of(p).message


# ------------------------------------------------------------- options and dtypes

def test_channel_selection_excludes_time_column(tmp_path):
    p = write_text(tmp_path / "c.csv", "t,a,b,c\n0,1,2,3\n1,4,5,6\n")
    rec = read_recording(p, channel=2)
    assert rec.channel_names == ["c"]
    np.testing.assert_array_equal(rec.samples[:, 0], [3, 6])
    err = error_of(p, channel=3)
    assert "channel 3" in err.message and "3 channels" in err.message


def test_float32_mode(tmp_path):
    p = write_text(tmp_path / "f.csv", "t,a\n0,0.1\n1,0.2\n")
    rec = read_recording(p, dtype=np.float32)
    assert rec.samples.dtype == np.float32
    np.testing.assert_array_equal(rec.samples[:, 0], np.array([0.1, 0.2], np.float32))


@pytest.mark.parametrize("bad", [0, -5, float("nan"), "fast"])
def test_bad_rate_is_an_error(tmp_path, bad):
    p = write_text(tmp_path / "f.csv", "1\n2\n")
    assert "--rate" in error_of(p, rate=bad).message


def test_duplicate_names_made_unique(tmp_path):
    p = write_text(tmp_path / "d.csv", "t,a,a\n0,1,2\n1,3,4\n")
    assert read_recording(p).channel_names == ["a", "a_2"]


def test_bulk_and_row_by_row_parsers_agree(tmp_path):
    rng = np.random.default_rng(3)
    data = rng.standard_normal((300, 4))
    lines = ["# bench", "time [ms];a;b;c;d"]
    for i, row in enumerate(data.tolist()):
        cells = [repr(i * 0.25)] + [repr(v) for v in row]
        lines.append(";".join(cells).replace(".", ","))
        if i % 50 == 7:
            lines.append("# marker")
    p = write_text(tmp_path / "b.csv", "\n".join(lines) + "\n")
    fast = read_text(p)
    slow = read_text(p, _bulk=False)
    np.testing.assert_array_equal(fast.samples, slow.samples)
    np.testing.assert_array_equal(fast.samples, data)
    assert fast.rate == slow.rate == pytest.approx(4000.0)


def test_probe_text(tmp_path):
    p = write_text(tmp_path / "p.csv", "time [ms];a;b\n0;1;2\n1;3;4\n2;5;6\n")
    facts = probe(p)
    assert facts["kind"] == "text"
    assert facts["frames"] == 3 and facts["frames_exact"]
    assert facts["channels"] == 2 and facts["channel_names"] == ["a", "b"]
    assert facts["rate"] == pytest.approx(1000.0)
    assert facts["estimated_bytes"] == 3 * 2 * 8


def test_probe_estimates_long_text(tmp_path):
    n = 20000
    lines = ["t,a"] + [f"{i * 0.001:.3f},{(i % 7) * 0.5:.3f}" for i in range(n)]
    p = write_text(tmp_path / "long.csv", "\n".join(lines) + "\n")
    facts = probe(p)
    assert not facts["frames_exact"]
    assert facts["frames"] == pytest.approx(n, rel=0.1)
    assert facts["rate"] == pytest.approx(1000.0, rel=1e-6)


# ------------------------------------------------------------------ any input

_CELLS = st.sampled_from(["1", "2,5", "0.5", "-1e3", "", "nan", "x", "time", "[ms]", "#"])


@settings(max_examples=60, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(rows=st.lists(st.lists(_CELLS, min_size=1, max_size=4), max_size=6),
       delimiter=st.sampled_from([",", ";", "\t", " "]),
       rate=st.sampled_from([None, 100.0]), fill=st.sampled_from([None, "linear"]))
def test_any_table_loads_or_gives_one_plain_error(tmp_path, rows, delimiter, rate, fill):
    # The contract's promise: bad input is one ScalesieveError, never a traceback.
    p = tmp_path / "any.csv"
    p.write_text("\n".join(delimiter.join(r) for r in rows) + "\n")
    try:
        rec = read_recording(p, rate=rate, fill_gaps=fill)
    except ScalesieveError as err:
        assert err.source == str(p) and err.message
    else:
        assert np.isfinite(rec.samples).all() and rec.rate > 0


def test_tab_header_with_empty_last_name_and_cr_lines(tmp_path):
    # Found by the fuzz tests: a tab-separated header whose last name is
    # empty (so the line ends in a tab), old-style CR line ends. Written with
    # Python's csv module as the outside writer; the values read back exactly.
    import csv as pycsv

    from scalesieve.io.readers import read_recording

    p = tmp_path / "table.csv"
    rows = [["t / ms", ""], ["0.0", "2.747345"], ["0.025", "1.803113e+00"], ["0.05", "9.22166e-01"]]
    with open(p, "w", newline="", encoding="utf-8-sig") as fh:
        pycsv.writer(fh, delimiter="\t", lineterminator="\r").writerows(rows)
    rec = read_recording(str(p))
    assert rec.channels == 1
    assert rec.samples[:, 0].tolist() == [2.747345, 1.803113, 0.922166]
    assert rec.rate == pytest.approx(1.0 / 0.025e-3)
