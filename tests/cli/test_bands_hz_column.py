"""`bands` prints band edges in Hz as plain numbers."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf

from scalesieve.cli import main


def test_hz_columns_are_plain_numbers_equal_to_the_dyadic_edges(tmp_path, capsys):
    # dyadic bands (common practice): detail j spans fs/2^(j+1) .. fs/2^j
    src = tmp_path / "x.wav"
    rate = 25600
    sf.write(src, 0.1 * np.random.default_rng(0).standard_normal(1 << 14), rate)
    assert main(["bands", str(src), "--level", "8"]) == 0
    rows = [ln.split() for ln in capsys.readouterr().out.splitlines()
            if ln.strip().startswith("d")]
    assert len(rows) == 8
    for cells in rows:
        j = int(cells[0][1:])
        lo, hi = cells[1], cells[2]
        assert "e" not in lo.lower() and "e" not in hi.lower(), cells
        assert float(lo) == pytest.approx(rate / 2 ** (j + 1), rel=1e-6)
        assert float(hi) == pytest.approx(rate / 2 ** j, rel=1e-6)
