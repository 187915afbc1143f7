"""The Bands pane shows the model's band figures, the ones `scalesieve bands` prints."""

import json

import numpy as np
import pytest

from scalesieve.cli import main
from scalesieve.core.recording import Recording
from scalesieve.core.transforms import TransformSpec


def _shown(window):
    window.adapter.wait_idle(120)
    pic = window.adapter.pictures(0)
    return window.adapter.model, pic


def test_constant_recording_shows_no_kurtosis_like_the_command_line(window, tmp_path, capsys):
    # A constant has no detail (every wavelet has zero mean: Daubechies 1992);
    # the command line and the window both say so (null / a dash).
    import soundfile as sf

    x = np.full(8192, 0.25)
    path = tmp_path / "constant.wav"
    sf.write(str(path), x, 8000, subtype="FLOAT")
    assert main(["bands", str(path), "--json"]) == 0
    cli = json.loads(capsys.readouterr().out)["channels"][0]["bands"]
    window.open_path(str(path), ask_text_settings=False)
    m, pic = _shown(window)
    assert [b["kurtosis"] for b in cli if b["kind"] == "detail"] == [None] * m.level
    for b in cli:
        key = "a" if b["kind"] == "approx" else b["level"]
        assert pic.stats[key]["kurtosis"] == b["kurtosis"]
        assert pic.stats[key]["energy_fraction"] == pytest.approx(b["energy_fraction"],
                                                                  rel=1e-12, abs=0.0)
    header = window.scale_map.headers[1]
    assert "kurtosis –" in header.hz.toolTip()


def test_window_figures_are_the_model_table_for_the_swt(window):
    # The same numbers everywhere: the pane's figures are band_table's rows.
    t = np.arange(1 << 14) / 8000.0
    x = np.sin(2 * np.pi * 440 * t) + 0.01 * np.random.default_rng(3).standard_normal(t.size)
    window.open_recording(Recording(x[:, None], 8000.0, ["mic"]),
                          TransformSpec("swt", "db4", 6, "symmetric"))
    m, pic = _shown(window)
    table = m.band_table(0)
    for key, row in zip(m.band_keys, table):
        for field in ("energy", "energy_fraction", "coef_energy", "rms", "peak", "kurtosis"):
            assert pic.stats[key][field] == row[field], (key, field)


def test_long_recording_figures_come_later_and_are_the_same(window, monkeypatch):
    # From FIGURES_LATER_FROM samples the window shows first and the band
    # figures follow from the background thread: the model's own function on
    # the same arrays, so the numbers equal band_table's bit for bit.
    from scalesieve.gui import display_data

    monkeypatch.setattr(display_data, "FIGURES_LATER_FROM", 0)
    t = np.arange(1 << 14) / 8000.0
    x = np.sin(2 * np.pi * 300 * t) + 0.05 * np.random.default_rng(5).standard_normal(t.size)
    window.open_recording(Recording(x[:, None], 8000.0, ["mic"]),
                          TransformSpec("dwt", "db4", 6, "symmetric"))
    m, pic = _shown(window)
    assert [pic.stats[key] for key in m.band_keys] == m.band_table(0)
    assert "%" in window.scale_map.headers[1].hz.toolTip()
