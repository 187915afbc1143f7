"""The figures of ``bands --json`` for a recording longer than memory, in one pass.

Each band's time-domain component is synthesised block by block on its own
and summed as it comes (DWT, in every mode: periodization's wraps each
component round the recording's ends, ``stream.wrap``), or made by FFT filtering per block (SWT), so
nothing is held at full length; the rows follow the whole-array table's
order and rules (``core.band_figures``).
"""

from __future__ import annotations

import numpy as np

from scalesieve.core import band_figures as bf
from scalesieve.core import transforms as tf
from scalesieve.errors import ScalesieveError
from scalesieve.stream import statistics as st
from scalesieve.stream.wrap import component_stream, forward_stream
from scalesieve.stream.choice import not_streamable
from scalesieve.stream.sources import _Source, after_parse, open_source
from scalesieve.stream.swt_clean import _swt_feed
from scalesieve.stream.statistics import plain_dot


def band_figures_stream(input_path: str, spec: tf.TransformSpec, *, channel=None,
                        rate: float | None = None, progress=None, fill_gaps=None,
                        group=None, dataset=None) -> tuple[dict, list]:
    """The figures of ``bands --json`` for every band of every channel, in one pass.

    Returns ``(facts, channels)``: ``facts`` holds ``rate``, ``samples``,
    the resolved ``spec``, the channels' ``names``, ``pick`` (the file's index
    of the one channel read, or None), ``start_time`` and ``warnings``; ``channels`` a list of band rows per channel
    (docs/reference.md: ``energy`` of the band's time-domain component,
    ``energy_fraction`` over the channel's energy, ``coef_energy``, ``rms``
    and ``peak`` of the component, ``kurtosis`` of the coefficients).  Each
    component is synthesised block by block on its own and summed as it
    comes, so nothing is held at full length.
    """
    src = open_source(input_path, channel, rate, progress, fill_gaps=fill_gaps, group=group,
                      dataset=dataset)
    progress = after_parse(src, progress)
    n = src.frames
    try:
        spec = spec.resolved(n)
    except ValueError as exc:
        raise ScalesieveError(str(exc), input_path) from None
    if spec.kind == "swt":
        return _band_figures_swt(src, spec, progress)
    why = not_streamable({"kind": "audio", "frames_exact": True}, spec, (), packets=True)
    if why is not None:
        raise ScalesieveError(why, input_path)
    if spec.kind == "packet":
        from scalesieve.stream.packet_bands import packet_figures_stream

        return packet_figures_stream(src, spec, progress)
    keys = tf.band_keys(spec.level)
    energy = [0.0] * src.channels
    moments = [{key: st.Moments() for key in keys} for _ in range(src.channels)]
    comp = [{key: [0.0, 0.0] for key in keys} for _ in range(src.channels)]   # sum sq, peak
    forwards, inverses = [], []
    for k in range(src.channels):
        def add(s0, seg, acc):
            acc[0] += float(plain_dot(seg, seg))
            if seg.size:
                acc[1] = max(acc[1], float(np.max(np.abs(seg))))
        # in periodization each component wraps round the ends (stream.wrap)
        invs = {key: component_stream(src, spec,
                                      lambda s0, seg, acc=comp[k][key]: add(s0, seg, acc),
                                      k, key) for key in keys}

        def put(key, k0, c, k=k, invs=invs):
            moments[k][key].add(c)
            invs[key].put(key, k0, c)
        inverses.append(invs)
        forwards.append(forward_stream(src, spec, put, k))
    for block in src.blocks():
        for k in range(src.channels):
            col = block[:, k]
            energy[k] += float(plain_dot(col, col))
            forwards[k].feed(col)
            for inv in inverses[k].values():
                inv.pump()
        if progress:
            progress(forwards[0].fed / n, "band figures")
    return _band_rows(src, spec, energy, moments, comp)


def _band_figures_swt(src: _Source, spec: tf.TransformSpec, progress) -> tuple[dict, list]:
    """``band_figures_stream`` of the SWT: one pass over the circle (stream.swt)."""
    from scalesieve.stream.swt import SwtComponent, band_key, inverse_reach

    n, level = src.frames, spec.level
    N = tf.swt_padded_length(n, level)
    keys = tf.band_keys(level)
    energy = [0.0] * src.channels
    moments = [{key: st.Moments() for key in keys} for _ in range(src.channels)]
    comp = [{key: [0.0, 0.0] for key in keys} for _ in range(src.channels)]   # sum sq, peak
    makers, puts = [], []
    for k in range(src.channels):
        def add(s0, seg, acc):
            acc[0] += float(plain_dot(seg, seg))
            if seg.size:
                acc[1] = max(acc[1], float(np.max(np.abs(seg))))
        mk = [SwtComponent(spec.wavelet, level, i,
                           lambda s0, seg, acc=comp[k][band_key(i, level)]: add(s0, seg, acc),
                           0, n) for i in range(level + 1)]

        def put(index, k0, r, values, k=k, mk=mk):
            if 0 <= k0 < N:                  # each coefficient of the circle counted once
                moments[k][band_key(index, level)].add(values)
            mk[index].put(index, k0, values)
        makers.append(mk)
        puts.append(put)

    def each_block(t, block, fraction):
        a, b = max(t, 0), min(t + block.shape[0], n)
        if b > a:
            for k in range(src.channels):
                col = np.ascontiguousarray(block[a - t:b - t, k])
                energy[k] += float(plain_dot(col, col))
        for mk in makers:
            for m in mk:
                m.pump()
        if progress:
            progress(fraction, "band figures")
    d0, d1 = inverse_reach(spec.wavelet, level)
    _swt_feed(src, spec, level, -d1, n - d0, puts, each_block)
    return _band_rows(src, spec, energy, moments, comp)


def _band_rows(src: _Source, spec: tf.TransformSpec, energy, moments, comp):
    """``band_figures_stream``'s answer from the sums gathered."""
    n = src.frames
    lengths = tf.band_lengths(n, spec)
    channels = []
    for k in range(src.channels):
        rows = []
        floor = bf.roundoff_floor(energy[k], np.float64)   # blocks are read as float64
        for key in tf.table_keys(spec):          # d1 ... dJ, then aJ (as bands --json)
            lo, hi = tf.band_range_hz(key, spec.level, src.rate)
            e, pk = comp[k][key]
            m = moments[k][key]
            rows.append({
                "name": tf.band_name(key, spec.level),
                "kind": "approx" if key == "a" else "detail",
                "level": spec.level if key == "a" else int(key),
                "low_hz": lo, "high_hz": hi,
                "count": int(lengths[tf.band_index(key, spec.level)]),
                "energy": e,
                "energy_fraction": e / energy[k] if energy[k] > 0 else 0.0,
                "coef_energy": m.square_sum,
                "rms": float(np.sqrt(e / n)), "peak": pk,
                # the whole-array rule (core.band_figures): None where only round-off
                "kurtosis": m.pearson_kurtosis() if m.square_sum > floor else None,
            })
        channels.append(rows)
    return {"rate": src.rate, "samples": n, "spec": spec, "names": list(src.names),
            "pick": src.pick, "start_time": src.start_time, "warnings": src.warnings()}, channels
