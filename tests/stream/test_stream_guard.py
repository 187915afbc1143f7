"""The memory guard's choice: blocks when the whole array would pass the budget, and why not."""

import numpy as np
import pytest
import soundfile as sf

from scalesieve import memory_guard
from scalesieve.core.transforms import TransformSpec
from scalesieve.errors import ScalesieveError


@pytest.fixture
def wav(tmp_path):
    path = tmp_path / "long.wav"
    sf.write(path, np.zeros((200_000, 2)), 8000, subtype="PCM_16")
    return path


def test_a_recording_past_the_budget_is_cleaned_in_blocks_and_says_what_that_costs(
        wav, monkeypatch):
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 20)
    facts = memory_guard.check(wav, transform=TransformSpec(), outputs=["out.wav"],
                               available=8 << 30)
    assert facts["in_blocks"]["bytes"] > 0
    # the whole-array estimate is still given beside it
    assert facts["needed_bytes"] > (1 << 20)
    # the same file within the budget: no blocks
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 40)
    assert "in_blocks" not in memory_guard.check(wav, transform=TransformSpec(),
                                                 outputs=["out.wav"], available=8 << 30)


def test_too_long_for_memory_but_fine_in_blocks_is_not_refused(wav, monkeypatch):
    import scalesieve.io.readers as readers

    real = readers.probe(wav)
    # a header of a day at 51.2 kHz on two channels: 4.4 G frames
    monkeypatch.setattr(readers, "probe", lambda path: dict(real, frames=4_423_680_000,
                                                                  frames_at_most=4_423_680_000))
    facts = memory_guard.check(wav, transform=TransformSpec(), outputs=["out.wav"],
                               available=2 << 30)
    assert facts["needed_bytes"] > 100 * (2 << 30) > facts["in_blocks"]["bytes"]
    with pytest.raises(ScalesieveError, match="even in blocks"):
        memory_guard.check(wav, transform=TransformSpec(), outputs=["out.wav"],
                           available=100 << 20)
    # without outputs (a caller that cannot work in blocks) it is refused as before
    with pytest.raises(ScalesieveError, match="needs about"):
        memory_guard.check(wav, transform=TransformSpec(), available=2 << 30)


@pytest.mark.parametrize("spec,packets,why", [
    # a caller that does not take packets in blocks (events)
    (TransformSpec(kind="packet"), False, "wavelet packets are worked on in blocks by bands "
                                          "and clean only")])
def test_what_blocks_cannot_do_is_refused_with_the_reason(wav, spec, packets, why):
    with pytest.raises(ScalesieveError, match=why):
        memory_guard.check(wav, transform=spec, outputs=["out.wav"], available=1 << 20,
                           packets=packets)


@pytest.mark.parametrize("mode", ["periodic", "periodization"])
def test_packets_in_the_wrapping_modes_are_taken_in_blocks(wav, monkeypatch, mode):
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 10)
    spec = TransformSpec(kind="packet", level=6, mode=mode)
    facts = memory_guard.check(wav, transform=spec, outputs=["out.wav"], available=8 << 30,
                               packets=True)
    assert facts["in_blocks"]["bytes"] > 0


def test_the_swt_is_taken_in_blocks_and_its_cost_said(wav, monkeypatch):
    monkeypatch.setattr(memory_guard, "STREAM_ABOVE", 1 << 20)
    swt = TransformSpec(kind="swt", level=8)
    facts = memory_guard.check(wav, transform=swt, outputs=["out.wav"], available=8 << 30)
    cost = facts["in_blocks"]["bytes"]
    # the SWT's blocks hold level + 1 bands: more than the DWT's, less than the whole array
    dwt = memory_guard.check(wav, transform=TransformSpec(level=8), outputs=["out.wav"],
                             available=8 << 30)["in_blocks"]["bytes"]
    assert dwt < cost
    # too little for the blocks, but the whole array fits: worked on whole, not refused
    need = facts["needed_bytes"]
    assert need < cost
    whole = memory_guard.check(wav, transform=swt, outputs=["out.wav"], available=cost - 1)
    assert "in_blocks" not in whole
    with pytest.raises(ScalesieveError, match="even in blocks"):
        memory_guard.check(wav, transform=swt, outputs=["out.wav"], available=need - 1)


def test_blocks_take_audio_and_text_tables_but_not_npz_outputs(wav, tmp_path):
    facts = memory_guard.probe_quietly(wav)
    ok, why = memory_guard.in_blocks(facts, transform=TransformSpec(), outputs=["o.npz"],
                                     available=1)
    assert not ok and "only audio and CSV outputs" in why
    # a measurement format whose library reads it whole (stream.choice.WHOLE_FORMATS)
    ok, why = memory_guard.in_blocks(dict(facts, kind="measurement", format="MATLAB"),
                                     transform=TransformSpec(), outputs=["o.wav"], available=1)
    assert not ok and "scipy.io reads a MATLAB v5 variable whole" in why
    ok, why = memory_guard.in_blocks(dict(facts, kind="unknown"), transform=TransformSpec(),
                                     outputs=["o.wav"], available=1)
    assert not ok and "only audio files (WAV, FLAC, AIFF, ...), text tables and measurement" \
        in why
    # a text table's row count is an estimate from its first rows: it is counted as it is
    # parsed in chunks (stream.text_source), so blocks take it
    ok, why = memory_guard.in_blocks(dict(facts, kind="text", frames_exact=False),
                                     transform=TransformSpec(), outputs=["o.wav"], available=1)
    assert ok and why is None
    # events take the SWT in blocks
    ok, why = memory_guard.in_blocks(facts, transform=TransformSpec(kind="swt"), outputs=(),
                                     available=1, swt=True)
    assert ok and why is None
