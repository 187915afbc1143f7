"""One recording cleaned block by block: read, forward DWT, recipe, inverse, write.

``clean_stream(input, output, ...)`` takes the arguments of
``scalesieve.batch.clean_file`` and returns the same report, so it can
stand in for it on a recording longer than memory.  Memory holds a block
of samples, each level's filter history and the coefficients the inverse
has not yet used, whatever the recording's length.

Rules that look at whole bands get what they need from first passes over
the file that run only the levels they need: the finest band's median for
``noise: finest`` (two passes, see ``statistics``), each level's median for
``noise: level``, the band's sum of squares for BayesShrink, the band's
values for SURE (SURE sorts the whole band, so that band is kept in memory
while its threshold is found).  The thresholds, and so the cleaned samples,
are the whole-array ones up to float round-off.
"""

from __future__ import annotations

import contextlib
import os
from typing import Sequence

import numpy as np
import soundfile as sf

from scalesieve.core import edits as ed
from scalesieve.core import thresholds as th
from scalesieve.core import transforms as tf
from scalesieve.errors import ScalesieveError
from scalesieve.io.readers import truncation_warnings
from scalesieve.stream import statistics as st
from scalesieve.stream.wrap import forward_stream, inverse_stream

#: frames read at a time
READ_FRAMES = tf.BLOCK
#: band-sized stretches of one channel an SWT in blocks holds at its peak, per block
#: of coefficients (see stream_bytes; fitted to tests/perf/bench_long.py)
SWT_COPIES = 5


def not_streamable(facts: dict | None, spec: tf.TransformSpec, outputs: Sequence[str],
                   fill_gaps: str | None = None, channel=None, swt: bool = False) -> str | None:
    """Why a command cannot run block by block, or None when it can.

    The SWT runs in blocks in every boundary mode (``stream.swt``); ``swt`` is
    kept for callers that passed it (``events``), and ``channel`` too: an
    audio file's channel, by number or by name (``ch1``), is read in blocks.
    """
    from scalesieve.io.writers import AUDIO_FORMAT_BY_EXTENSION, CSV_EXTENSIONS

    if facts is None or facts.get("kind") != "audio":
        return "only audio files (WAV, FLAC, AIFF, ...) are read in blocks"
    if not facts.get("frames_exact"):
        return "its header's frame count cannot be trusted"
    if spec.kind == "swt":
        pass                   # every mode: the blocks read the circle the model pads
    elif spec.kind != "dwt":
        return f"the {spec.kind.upper()} keeps every level at full length (use --transform dwt)"
    for out in outputs:
        ext = os.path.splitext(out)[1].lower()
        if ext not in AUDIO_FORMAT_BY_EXTENSION and ext not in CSV_EXTENSIONS:
            return f"{os.path.basename(out)}: only audio and CSV outputs are written in blocks"
    if fill_gaps is not None:
        return "--fill-gaps needs the whole recording"
    return None


def stream_bytes(channels: int, spec: tf.TransformSpec) -> int:
    """About what a clean in blocks holds, whatever the length (see docs/performance.md).

    Per channel: blocks of samples and their temporaries, the level-1 input
    history, the coefficients waiting for the inverse (the coarse levels lag
    the input by about MIN_STEP * 2^J samples) and blocks of output, in
    float64; and the interpreter with its libraries (about 85 MiB).  Fitted
    to the peaks tests/perf/bench_long.py measures (see docs/performance.md).
    """
    from scalesieve.stream.dwt import MIN_STEP

    level = spec.level or tf.MAX_DEFAULT_LEVEL
    if spec.kind == "swt":
        from scalesieve.stream.swt import SWT_BLOCK

        # per channel: the forward's window and its level + 1 bands, the inverse's
        # window of level + 1 bands and what pywt.iswt makes of it (see stream.swt)
        reach = 2 * (tf.filter_length(spec.wavelet) - 1) * 2 ** level
        per_channel = 8 * (level + 1) * (SWT_BLOCK + 2 * reach) * SWT_COPIES
        return int(channels * per_channel + 8 * 12 * READ_FRAMES + (96 << 20))
    lag = (MIN_STEP + 2 * tf.filter_length(spec.wavelet)) * 2 ** level
    per_channel = 8 * (12 * READ_FRAMES + 4 * lag)
    return int(channels * per_channel + (96 << 20))


# --------------------------------------------------------------------------
# reading


class _Source:
    """The recording's samples in blocks of frames, float64, checked as they come."""

    def __init__(self, path: str, channel: int | None):
        from scalesieve.io.quiet_native import quiet_native_stderr

        self.path, self.pick = path, channel
        try:
            with quiet_native_stderr(), sf.SoundFile(path) as f:
                self.rate = float(f.samplerate)
                self.file_channels = int(f.channels)
                self.frames = int(f.frames)
                self.format, self.subtype = f.format, f.subtype
        except Exception as exc:  # noqa: BLE001 - soundfile's own errors vary by version
            raise ScalesieveError(f"could not read the audio samples ({exc})", path) from None
        self.channels = 1 if channel is not None else self.file_channels

    def blocks(self, frames: int = READ_FRAMES, start: int = 0, stop: int | None = None):
        """Frames ``start .. stop`` (default all) in blocks of ``frames``."""
        from scalesieve.io.input_check import MAX_ABS_SAMPLE, first_unusable

        stop = self.frames if stop is None else stop
        done = start
        try:
            f = sf.SoundFile(self.path)
        except Exception as exc:  # noqa: BLE001 - soundfile's own errors vary by version
            raise ScalesieveError(f"could not read the audio samples ({exc})", self.path) from None
        with f:
            if start:
                f.seek(start)
            while done < stop:
                try:
                    block = f.read(min(frames, stop - done), dtype="float64", always_2d=True)
                except Exception as exc:  # noqa: BLE001 - as above
                    raise ScalesieveError(f"could not read the audio samples after frame "
                                          f"{done} ({exc})", self.path) from None
                if block.shape[0] == 0:
                    break
                if self.pick is not None:
                    block = block[:, self.pick:self.pick + 1]
                bad = first_unusable(block)
                if bad is not None:
                    r, c = bad
                    v = float(block[r, c])
                    r += done
                    c = self.pick if self.pick is not None else c
                    where = f"sample {r} (at {r / self.rate:.6g} s) of channel {c}"
                    what = ("is NaN; use --fill-gaps linear to fill gaps" if np.isnan(v) else
                            "is infinite" if np.isinf(v) else
                            f"is {v:.3g}, beyond ±{MAX_ABS_SAMPLE:g}; the file looks damaged")
                    raise ScalesieveError(f"{where} {what}", self.path)
                done += block.shape[0]
                yield block
        if done != stop:
            raise ScalesieveError(f"holds {done} readable frames, but its header says "
                                  f"{self.frames} (truncated?)", self.path)


def open_source(input_path: str, channel=None, rate: float | None = None) -> _Source:
    """The recording to read in blocks, its channel and rate checked as the readers check them."""
    from scalesieve.io.csv_reader import check_channel, check_rate

    whole = _Source(input_path, None)
    # an audio file's channels are named ch0, ch1, ... (as io.readers names them)
    names = [f"ch{k}" for k in range(whole.file_channels)]
    src = _Source(input_path, check_channel(channel, whole.file_channels, input_path, names))
    given = check_rate(rate, input_path)
    if given is not None and abs(given - src.rate) > 1e-9 * src.rate:
        raise ScalesieveError(
            f"the file's header says {src.rate:g} Hz; --rate {given:g} does not match "
            "(the rate of an audio file comes from its header; leave out --rate)", input_path)
    return src


# --------------------------------------------------------------------------
# writing


class _AudioTarget:
    """One audio output written block by block into a temporary file, published at the end.

    Format and subtype are chosen as ``io.writers.write_signal`` chooses them.
    """

    def __init__(self, stack: contextlib.ExitStack, target: str, src: _Source, n: int,
                 subtype: str | None, force: bool, protect: Sequence[str]):
        from scalesieve.io import writers as W
        from scalesieve.io.atomic import atomic_target

        ext = os.path.splitext(target)[1].lower()
        fmt = W.AUDIO_FORMAT_BY_EXTENSION[ext]
        if src.format in W._FAMILY.get(fmt, ()):
            fmt = src.format
        sub = subtype or W._choose_subtype(fmt, src.subtype)
        sub = W._check_subtype(fmt, sub or W._DEFAULT_SUBTYPE.get(fmt) or sf.default_subtype(fmt),
                               target)
        sr = W._whole_rate(src.rate, target)
        most = W._MAX_CHANNELS.get(fmt)
        if most is not None and src.channels > most:
            raise ScalesieveError(f"{fmt} holds at most {most} channels and this signal has "
                                  f"{src.channels}; write .wav instead", source=target)
        if fmt == "WAV" and n * src.channels * W._BYTES_PER_SAMPLE.get(sub, 8) > W._WAV_DATA_LIMIT:
            fmt = "RF64"
        self.clips = sub not in W._FLOAT_SUBTYPES
        self.clipped = 0
        self.report = {"path": target, "kind": "audio", "format": fmt, "subtype": sub,
                       "rate": float(sr), "channels": int(src.channels), "frames": int(n)}
        if subtype is None and src.subtype and sub != src.subtype:
            self.report["subtype_from"] = src.subtype   # as io.writers.write_signal says it
        tmp = stack.enter_context(atomic_target(target, force=force, protect=protect))
        try:
            self.file = stack.enter_context(sf.SoundFile(tmp, "w", samplerate=sr,
                                                         channels=src.channels, format=fmt,
                                                         subtype=sub))
        except W._SF_ERRORS as exc:
            raise ScalesieveError(f"could not write {fmt} {sub}: {exc}", source=target) from None
        self.target = target

    def write(self, block: np.ndarray) -> None:
        if not np.isfinite(block).all():
            raise ScalesieveError("the cleaned signal holds NaN or infinite values",
                                  source=self.target)
        if self.clips:
            out = (block < -1.0) | (block >= 1.0)
            count = int(np.count_nonzero(out))
            if count:
                self.clipped += count
                block = np.clip(block, -1.0, 1.0)
        self.file.write(block)

    def finished(self) -> dict:
        return dict(self.report, clipped=int(self.clipped))


class _CsvTarget:
    """One CSV output written block by block as ``io.writers.write_csv`` writes it whole:
    a ``time_s`` column from 0 in steps of 1/rate, then one column per channel, ``%.17g``."""

    def __init__(self, stack: contextlib.ExitStack, target: str, src: _Source, n: int,
                 force: bool, protect: Sequence[str]):
        from scalesieve.io import writers as W
        from scalesieve.io.atomic import atomic_target

        self.rate = float(src.rate)
        names = ([f"ch{k}" for k in range(src.channels)] if src.pick is None
                 else [f"ch{src.pick}"])
        self.row = ",".join(["%.17g"] * (src.channels + 1)) + "\n"
        self.report = {"path": target, "kind": "csv", "format": None, "subtype": None,
                       "rate": self.rate, "channels": int(src.channels), "frames": int(n)}
        tmp = stack.enter_context(atomic_target(target, force=force, protect=protect))
        self.file = stack.enter_context(open(tmp, "w", encoding="utf-8", newline=""))
        self.file.write(W._header_line(["time_s"] + names))
        self.target, self.done = target, 0

    def write(self, block: np.ndarray) -> None:
        from scalesieve.io.writers import _CSV_CHUNK_ROWS

        if not np.isfinite(block).all():
            raise ScalesieveError("the cleaned signal holds NaN or infinite values",
                                  source=self.target)
        for a in range(0, block.shape[0], _CSV_CHUNK_ROWS):
            part = block[a:a + _CSV_CHUNK_ROWS]
            start = self.done
            chunk = np.empty((part.shape[0], part.shape[1] + 1), dtype=np.float64)
            chunk[:, 0] = np.arange(start, start + part.shape[0], dtype=np.float64) / self.rate
            chunk[:, 1:] = part
            self.file.write((self.row * part.shape[0]) % tuple(chunk.ravel().tolist()))
            self.done += part.shape[0]

    def finished(self) -> dict:
        return dict(self.report, clipped=0)


def _target(stack, out: str, src: _Source, n: int, subtype, force: bool, protect):
    """The writer of one output in blocks: CSV for .csv/.txt, else audio."""
    from scalesieve.io.writers import CSV_EXTENSIONS

    if os.path.splitext(out)[1].lower() in CSV_EXTENSIONS:
        return _CsvTarget(stack, out, src, n, force, protect)
    return _AudioTarget(stack, out, src, n, subtype, force, protect)


class _Join:
    """Cleaned blocks of every channel put side by side, with the input they came from."""

    def __init__(self, channels: int, targets: list[_AudioTarget], removed: bool):
        self.orig = [tf._Carry(0, np.float64) for _ in range(channels)]
        self.clean = [tf._Carry(0, np.float64) for _ in range(channels)]
        self.targets, self.removed = targets, removed
        self.written = 0
        self.energy = 0.0
        self.removed_energy = 0.0

    def add_input(self, block: np.ndarray) -> None:
        for k, c in enumerate(self.orig):
            c.append(block[:, k])

    def put(self, k: int, s0: int, seg: np.ndarray) -> None:
        self.clean[k].append(seg)

    def flush(self) -> None:
        r = min(min(c.hi for c in self.clean), min(c.hi for c in self.orig))
        w = self.written
        if r <= w:
            return
        cleaned = np.stack([c.view(w, r) for c in self.clean], axis=1)
        x = np.stack([c.view(w, r) for c in self.orig], axis=1)
        gone = x - cleaned
        self.energy += float(np.sum(x * x))
        self.removed_energy += float(np.sum(gone * gone))
        self.targets[0].write(cleaned)
        if self.removed:
            self.targets[1].write(gone)
        for c in self.orig + self.clean:
            c.drop_below(r)
        self.written = r


# --------------------------------------------------------------------------
# the recipe, band by band


class _Band:
    """One band's chain of edits, its context and its thresholds as they become known."""

    def __init__(self, chain: tuple, ctx: ed.BandContext):
        self.chain, self.ctx = chain, ctx
        self.thr = [i for i, e in enumerate(chain) if e.op == "threshold"]
        self.lams: list = [None] * len(self.thr)
        self.gather = None          # (t, SquareSum | BandValues) until threshold t is known
        self.gathering = False      # the gatherer is being filled in this pass

    def known(self) -> int:
        """Thresholds known, in chain order."""
        t = 0
        while t < len(self.lams) and self.lams[t] is not None:
            t += 1
        return t

    def edited(self, c: np.ndarray, k0: int) -> np.ndarray:
        if not self.chain:
            return c
        return ed.state_values(c, ed.chain_values(c, self.chain, self.ctx, self.lams, k0))

    def before(self, t: int, c: np.ndarray, k0: int) -> np.ndarray:
        """The band as threshold t of the chain finds it (earlier edits applied)."""
        i = self.thr[t]
        return ed.state_values(c, ed.chain_values(c, self.chain[:i], self.ctx, self.lams[:t], k0))


def _chains(edits, channel: int, level: int) -> dict:
    chains: dict = {key: [] for key in tf.band_keys(level)}
    for e in edits:
        if e.applies_to(channel):
            for key in dict.fromkeys(e.band_keys(level)):
                if key in chains:
                    chains[key].append(e)
    return {key: tuple(v) for key, v in chains.items()}


class _Plan:
    """Every channel's bands, the medians the noise needs, the passes that find them."""

    def __init__(self, edits, channels: int, spec: tf.TransformSpec, n: int, rate: float):
        self.spec, self.n = spec, n
        self.edits = tuple(edits)
        self.lengths = tf.band_lengths(n, spec)
        self.medians: dict = {}            # (channel, key) -> MedianOfMagnitudes
        self.bands: list[dict] = []
        for k in range(channels):
            bands = {}
            for key, chain in _chains(edits, k, spec.level).items():
                bands[key] = _Band(chain, self._ctx(k, key, rate))
                for i in bands[key].thr:
                    e = chain[i]
                    if e.rule != "manual":
                        self.medians.setdefault((k, 1 if e.noise == "finest" else key),
                                                st.MedianOfMagnitudes())
            self.bands.append(bands)

    def _ctx(self, k: int, key, rate: float) -> ed.BandContext:
        count = self.lengths[tf.band_index(key, self.spec.level)]
        spec = self.spec

        def sigma(which):
            m = self.medians.get((k, which))
            if m is None or m.value is None:
                raise LookupError("noise not yet known")
            return m.sigma()

        def positions():
            raise AssertionError("positions are found by span in blocks")

        # noise: finest carries level 1's sigma by the transform's white-noise gain
        gain = th.white_noise_gain(spec.kind, key, spec.level)
        return ed.BandContext(key=key, n_samples=self.n, rate=rate, positions=positions,
                              sigma_finest=lambda: sigma(1) * gain,
                              sigma_level=lambda: sigma(key),
                              span=lambda lo, hi: tf.coefficient_slice(key, spec, count, lo, hi))

    def resolve(self) -> bool:
        """Work out every threshold whose inputs are known; True when all are."""
        done = True
        for bands in self.bands:
            for band in bands.values():
                for t in range(band.known(), len(band.lams)):
                    e = band.chain[band.thr[t]]
                    try:
                        if ed.is_pointwise(e):
                            band.lams[t] = ed.threshold_value(e, np.zeros(0), band.ctx)
                        elif band.gather is not None and band.gather[0] == t:
                            sigma = (band.ctx.sigma_finest() if e.noise == "finest"
                                     else band.ctx.sigma_level())
                            g = band.gather[1]
                            lam = (g.bayes_threshold(sigma) if e.rule == "bayes"
                                   else g.sure_threshold(sigma))
                            band.lams[t] = lam * float(e.scale)
                            band.gather = None
                        else:
                            break
                    except LookupError:
                        break
                done = done and band.known() == len(band.lams)
        return done

    def next_pass(self) -> int:
        """Set up what the next pass gathers; returns the deepest level it needs (0: none)."""
        depth = 0
        level = self.spec.level
        for (k, key), m in self.medians.items():
            if m.stage != "done":
                depth = max(depth, level if key == "a" else int(key))
        for bands in self.bands:
            for key, band in bands.items():
                t = band.known()
                if t < len(band.lams) and band.gather is None \
                        and not ed.is_pointwise(band.chain[band.thr[t]]):
                    e = band.chain[band.thr[t]]
                    band.gather = (t, st.SquareSum() if e.rule == "bayes" else st.BandValues())
                    band.gathering = True
                if band.gathering:
                    depth = max(depth, level if key == "a" else int(key))
        return depth

    def gatherer(self, k: int):
        """``put(key, k0, values)`` of a first pass, for channel k."""
        meds = {key: m for (kk, key), m in self.medians.items()
                if kk == k and m.stage != "done"}
        bands = self.bands[k]

        def put(key, k0, c):
            m = meds.get(key)
            if m is not None:
                m.add(c)
            band = bands.get(key)
            if band is not None and band.gathering:
                t, g = band.gather
                g.add(band.before(t, c, k0))
        return put

    def end_pass(self) -> None:
        for m in self.medians.values():
            if m.stage != "done":
                m.end_pass()
        for bands in self.bands:
            for band in bands.values():
                band.gathering = False


# --------------------------------------------------------------------------
# the file


def _prepare(input_path: str, outputs: list, *, recipe, transform, edits, force, rate,
             channel, fill_gaps):
    """Every check a clean makes before it reads a sample: ``(src, spec, plan)``."""
    from scalesieve.io.atomic import check_target
    from scalesieve.recipe import check_against

    if len(outputs) == 2 and os.path.realpath(outputs[0]) == os.path.realpath(outputs[1]):
        raise ScalesieveError("-o and --removed name the same file", outputs[0])
    for out in outputs:
        check_target(out, force=force, protect=[input_path])
    if fill_gaps is not None:
        raise ScalesieveError("--fill-gaps needs the whole recording", input_path)
    src = open_source(input_path, channel, rate)
    n = src.frames
    spec = transform or (recipe.transform if recipe is not None else None) or tf.TransformSpec()
    try:
        spec = spec.resolved(n)
    except ValueError as exc:
        raise ScalesieveError(str(exc), input_path) from None
    why = not_streamable({"kind": "audio", "frames_exact": True}, spec, outputs)
    if why is not None:
        raise ScalesieveError(why, input_path)
    all_edits = tuple(recipe.edits if recipe is not None else ()) + tuple(edits)
    check_against(all_edits, spec.level, n / src.rate, src.channels, source=input_path)
    return src, spec, _Plan(all_edits, src.channels, spec, n, src.rate)


def _thresholds(src: _Source, spec: tf.TransformSpec, plan: _Plan, report) -> int:
    """The first passes: every threshold of the recipe worked out; returns how many passes."""
    n = src.frames
    passes = 0
    while not plan.resolve():
        depth = plan.next_pass()
        if depth == 0:  # pragma: no cover - resolve() always leaves something to gather
            raise AssertionError("a threshold waits for nothing")
        puts = [plan.gatherer(k) for k in range(src.channels)]
        if spec.kind == "swt":
            _swt_pass(src, spec, depth, puts, report, passes)
        else:
            streams = [forward_stream(src, spec, puts[k], k, depth)
                       for k in range(src.channels)]
            for block in src.blocks():
                for k, s in enumerate(streams):
                    s.feed(block[:, k])
                report(passes, streams[0].fed, "gathering the noise and band figures")
        plan.end_pass()
        passes += 1
    return passes


def _circle(src: _Source, spec: tf.TransformSpec):
    """The model's padded recording as a circle, its padding read once (stream.swt)."""
    from scalesieve.stream.swt import Circle

    key = (spec.level, spec.mode)
    if getattr(src, "circle_key", None) != key:
        src.circle, src.circle_key = Circle(src, spec.level, spec.mode), key
    return src.circle


def _swt_feed(src: _Source, spec: tf.TransformSpec, depth: int, lo: int, hi: int,
              puts: list, each_block=None) -> None:
    """Coefficients ``lo .. hi`` (unwrapped) of the SWT to ``depth`` of every channel.

    ``puts[k](index, k0, r, values)`` gets them in blocks cut where the circle
    closes (``k0`` unwrapped, ``r`` its place on the circle);
    ``each_block(t, samples, fraction)`` sees each block of the circle fed.
    """
    from scalesieve.stream.swt import SwtForward

    circle = _circle(src, spec)
    N = circle.N

    def cut(put):
        def split(index, k0, values):
            a = 0
            while a < values.shape[0]:
                r = (k0 + a) % N
                b = min(values.shape[0], a + N - r)
                put(index, k0 + a, r, values[a:b])
                a = b
        return split

    streams = [SwtForward(spec.wavelet, depth, lo, hi, cut(puts[k]))
               for k in range(src.channels)]
    t0, t1 = streams[0].samples
    t = t0
    for block in circle.blocks(t0, t1, READ_FRAMES):
        for k, f in enumerate(streams):
            f.feed(block[:, k])
        if each_block is not None:
            each_block(t, block, (t + block.shape[0] - t0) / max(1, t1 - t0))
        t += block.shape[0]


def _swt_pass(src, spec, depth, gatherers, report, passes) -> None:
    """A first pass of the SWT: every coefficient of the circle once, to the gatherers."""
    def put_key(g):
        def put(index, k0, r, values):
            if index == 0 and depth != spec.level:
                return                       # the approximation at ``depth``: not a band
            g("a" if index == 0 else depth - index + 1, r, values)
        return put

    N = tf.swt_padded_length(src.frames, spec.level)
    _swt_feed(src, spec, depth, 0, N, [put_key(g) for g in gatherers],
              lambda t, b, f: report(passes, f * src.frames,
                                     "gathering the noise and band figures"))


def _clean_swt(src: _Source, spec: tf.TransformSpec, plan: _Plan, join, report,
               passes: int) -> None:
    """The cleaning pass of the SWT: circle -> coefficients -> recipe -> iswt -> join."""
    from scalesieve.stream.swt import SwtInverse, band_key, inverse_reach

    n, level = src.frames, spec.level
    d0, d1 = inverse_reach(spec.wavelet, level)
    inverses, puts = [], []
    for k in range(src.channels):
        inv = SwtInverse(spec.wavelet, level, lambda s0, seg, k=k: join.put(k, s0, seg), 0, n)
        bands = plan.bands[k]

        def put(index, k0, r, values, inv=inv, bands=bands):
            inv.put(index, k0, bands[band_key(index, level)].edited(values, r))
        inverses.append(inv)
        puts.append(put)

    def each_block(t, block, fraction):
        a, b = max(t, 0), min(t + block.shape[0], n)
        if b > a:                            # the recording itself, once, in order
            join.add_input(block[a - t:b - t])
        for inv in inverses:
            inv.pump()
        join.flush()
        report(passes, fraction * n, "cleaning")
    # the first outputs read the circle's last coefficients, the last ones its first
    _swt_feed(src, spec, level, -d1, n - d0, puts, each_block)


def _result(src, reports, join, passes, spec, edits=()) -> dict:
    from scalesieve.recipe import Recipe

    return {
        "samples": src.frames,
        "channels": src.channels,
        "rate": src.rate,
        "outputs": reports,
        "clipped": int(sum(r["clipped"] for r in reports)),
        "energy_removed_fraction": join.removed_energy / join.energy if join.energy > 0 else 0.0,
        "blocks": {"passes": passes, "frames_per_block": READ_FRAMES,
                   "bytes": stream_bytes(src.channels, spec)},
        "recipe": Recipe(transform=spec, edits=edits),   # as applied: level resolved
        "warnings": truncation_warnings(src.path, src.frames),
    }



def clean_stream(input_path: str, output: str, *, recipe=None,
                 transform: tf.TransformSpec | None = None, edits: Sequence = (),
                 removed: str | None = None, subtype: str | None = None, force: bool = False,
                 rate: float | None = None, channel: int | None = None,
                 fill_gaps: str | None = None, progress=None) -> dict:
    """``scalesieve.batch.clean_file`` block by block: the same arguments and report.

    The report also says ``"blocks": {"passes", "frames_per_block", "bytes"}``:
    how many times the file was read, in blocks of how many frames, and
    about how much memory that took.
    """
    outputs = [output] + ([removed] if removed else [])
    src, spec, plan = _prepare(input_path, outputs, recipe=recipe, transform=transform,
                               edits=edits, force=force, rate=rate, channel=channel,
                               fill_gaps=fill_gaps)
    n = src.frames
    # a threshold rule needs two passes for a median, one for band sums
    expected = 1 + (2 if plan.medians else 0)

    def report(p, fed, text):
        if progress:
            progress(min(1.0, (p + fed / n) / max(expected, p + 1)), text)

    passes = _thresholds(src, spec, plan, report)
    with contextlib.ExitStack() as stack:
        targets = [_target(stack, out, src, n, subtype, force, [input_path])
                   for out in outputs]
        join = _Join(src.channels, targets, removed is not None)
        inverses, forwards = [], []
        for k in range(src.channels if spec.kind == "dwt" else 0):
            bands = plan.bands[k]
            inv = inverse_stream(src, spec, lambda s0, seg, k=k: join.put(k, s0, seg), k, bands)

            def put(key, k0, c, inv=inv, bands=bands):
                inv.put(key, k0, bands[key].edited(c, k0))
            inverses.append(inv)
            forwards.append(forward_stream(src, spec, put, k))
        if spec.kind == "swt":
            _clean_swt(src, spec, plan, join, report, passes)
        for block in src.blocks() if spec.kind == "dwt" else ():
            join.add_input(block)
            for k in range(src.channels):
                forwards[k].feed(block[:, k])
                inverses[k].pump()
            join.flush()
            report(passes, forwards[0].fed, "cleaning")
        passes += 1
        if join.written != n:  # pragma: no cover - the inverse makes every sample
            raise AssertionError(f"made {join.written} of {n} samples")
        reports = [t.finished() for t in targets]
    if progress:
        progress(1.0, "cleaned")
    return _result(src, reports, join, passes, spec, plan.edits)


# --------------------------------------------------------------------------
# band figures
