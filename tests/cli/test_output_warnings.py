"""`clean` says when the output's sample format is not the input's, and how to avoid clipping."""

from __future__ import annotations

import numpy as np
import soundfile as sf

from scalesieve.cli import main
from scalesieve.io.writers import CLIP_ADVICE_SHARE


def _warnings(err: str) -> list[str]:
    return [ln for ln in err.splitlines() if ln.startswith("scalesieve: warning: ")]


def test_float_wav_into_flac_names_the_subtype_change(tmp_path, capsys):
    # FLAC holds integer PCM only (libsndfile's available_subtypes("FLAC") lists no FLOAT)
    assert "FLOAT" not in sf.available_subtypes("FLAC")
    src, out = tmp_path / "f.wav", tmp_path / "f.flac"
    x = 0.3 * np.sin(np.arange(8000) / 7.0)
    sf.write(src, x, 8000, subtype="FLOAT")
    assert main(["clean", str(src), "-o", str(out), "--zero", "1"]) == 0
    lines = _warnings(capsys.readouterr().err)
    assert sf.info(out).subtype == "PCM_24"
    assert lines == [f"scalesieve: warning: {out}: written as PCM_24, not the input's FLOAT "
                     f"(FLAC cannot hold it); use a .wav output or --subtype to choose"]


def test_no_subtype_warning_when_asked_or_kept(tmp_path, capsys):
    src = tmp_path / "f.wav"
    sf.write(src, 0.3 * np.sin(np.arange(8000) / 7.0), 8000, subtype="FLOAT")
    assert main(["clean", str(src), "-o", str(tmp_path / "a.flac"), "--zero", "1",
                 "--subtype", "PCM_24"]) == 0
    assert main(["clean", str(src), "-o", str(tmp_path / "b.wav"), "--zero", "1"]) == 0
    assert _warnings(capsys.readouterr().err) == []


def test_heavy_clipping_warns_in_contract_form_with_advice(tmp_path, capsys):
    # counted independently: samples of the cleaned signal outside [-1, 1) in a
    # float WAV written alongside (soundfile keeps float values unclipped)
    src = tmp_path / "loud16.wav"
    x = np.clip(1.5 * np.sin(np.arange(8000) / 5.0), -1.0, 32767 / 32768)
    sf.write(src, x, 8000, subtype="PCM_16")
    ref = tmp_path / "ref.wav"
    assert main(["clean", str(src), "-o", str(ref), "--zero", "1", "--subtype", "FLOAT"]) == 0
    y = sf.read(ref)[0]
    want = int(np.count_nonzero((y < -1.0) | (y >= 1.0)))
    assert want > CLIP_ADVICE_SHARE * y.size
    capsys.readouterr()
    out = tmp_path / "l.wav"
    assert main(["clean", str(src), "-o", str(out), "--zero", "1"]) == 0
    lines = _warnings(capsys.readouterr().err)
    assert len(lines) == 1
    assert lines[0].startswith(f"scalesieve: warning: {out}: {want} samples clipped")
    assert "float WAV" in lines[0] and ".csv" in lines[0] and "gain" in lines[0]
