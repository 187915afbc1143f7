"""Exact samples of any stretch of a long recording with the current edits, and its export.

``LongRecording.synthesise(t0, t1)`` reads samples ``t0 .. t1`` widened by
what the filters read on either side (``stream.dwt.stretch``), runs the
forward cascade over just that stretch, edits the coefficients (band gains,
thresholds with the whole bands' noise from the summary, region edits) and
synthesises outputs ``t0 .. t1``: the samples the whole-array
``pywt.waverec`` of the edited ``pywt.wavedec`` gives there, within float
round-off, at a cost that follows the stretch, not the recording.
In ``periodic`` and ``periodization`` the stretch is made by ``longview.wrapped``
(a stretch near one end reads the other).  ``export`` runs the same edits over the
whole file through the streaming
pipeline (``stream.pipeline.clean_stream``), which works its thresholds out
again from its own first passes: the same numbers the command line writes.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from scalesieve.core import transforms as tf
from scalesieve.errors import ScalesieveError
from scalesieve.longview.samples import SampleReader
from scalesieve.longview.summary import Summary
from scalesieve.longview.wrapped import WRAP_MODES
from scalesieve.stream import statistics as st

#: feed the stretch to the cascade in blocks of this many samples
FEED = tf.BLOCK


def why_not_long(spec: tf.TransformSpec) -> str | None:
    """Why a long recording cannot be shown under ``spec``, or None when it can."""
    from scalesieve.longview.wrapped import WRAP_MODES
    from scalesieve.stream.dwt import STREAM_MODES

    if spec.kind == "swt":
        return ("a long recording is shown with the DWT: the SWT keeps every level at full "
                "length, and its summary and exact stretches are not made in blocks yet "
                "(use --transform dwt; `scalesieve clean --transform swt` runs in blocks)")
    if spec.kind != "dwt":
        return ("a long recording is shown with the DWT: wavelet packets have no summary in "
                "blocks yet (use --transform dwt; `scalesieve bands` and `clean` run packets "
                "in blocks)")
    if spec.mode not in STREAM_MODES and spec.mode not in WRAP_MODES:
        return f"the DWT in mode {spec.mode} is not shown for a long recording"
    return None


@dataclass
class Span:
    """What ``synthesise`` makes: samples ``start .. stop`` of every channel, (m, channels),
    and each band's edited coefficients positioned in the stretch:
    ``coefficients[k][key] = (k0, values)``."""

    start: int
    stop: int
    original: np.ndarray
    cleaned: np.ndarray
    coefficients: list

    @property
    def removed(self) -> np.ndarray:
        return self.original - self.cleaned


class LongRecording:
    """A recording read on demand, its summary, a recipe's edits, exact stretches of it.

    Parameters
    ----------
    path : str
        An audio file.
    spec : TransformSpec
        Resolved (level given); ``why_not_long(spec)`` must be None.
    summary : Summary
        Of this file under ``spec`` (``longview.cache.summary_for``).
    channel : int, optional
        Only this channel, as the summary was made.
    """

    def __init__(self, path: str, spec: tf.TransformSpec, summary: Summary,
                 channel: int | None = None, reader: SampleReader | None = None):
        why = why_not_long(spec)
        if why is not None:
            raise ScalesieveError(why, path)
        self.path, self.spec, self.summary, self.channel = path, spec, summary, channel
        self.reader = reader or SampleReader(path, channel)
        self.n, self.rate, self.channels = summary.n, summary.rate, summary.channels
        if self.reader.frames != self.n or self.reader.channels != self.channels:
            raise ScalesieveError("the summary does not match the file (changed since?)", path)
        self.edits: tuple = ()
        self._last_forward = None          # ((t0, t1), samples, raw coefficients)
        self.plan = self._plan(())
        from scalesieve.longview.edges import BandRanges

        #: exact coefficients of any band over a range (a wide view's blocks at region edges)
        self.ranges = BandRanges(self)

    # ------------------------------------------------------------------ edits

    def set_edits(self, edits: Sequence, progress=None) -> None:
        """Take ``edits`` (checked against the recording); thresholds worked out now.

        Rules that read a whole band's noise take it from the summary (the first
        time a band's noise is needed, a pass to its depth finds its exact median,
        then kept with the summary); BayesShrink after gains only, from the
        summary's band energies; any other threshold (SURE, or BayesShrink after
        a region edit) needs a pass over the file; passes are told to
        ``progress(fraction, text)``.
        """
        from scalesieve.recipe import check_against

        edits = tuple(edits)
        check_against(edits, self.spec.level, self.n / self.rate, self.channels,
                      source=self.path)
        self.plan = self._plan(edits, progress)
        self.edits = edits

    def _plan(self, edits: tuple, progress=None):
        from scalesieve.stream.pipeline import _Plan, _Source, _thresholds

        plan = _Plan(edits, self.channels, self.spec, self.n, self.rate)
        wanted = list(plan.medians)
        if self.summary.missing(wanted):
            from scalesieve.longview import cache

            def told(fraction, text):
                if progress:
                    progress(fraction, text)
            self.summary.find_medians(_Source(self.path, self.channel), wanted, told)
            if self.summary.kept_as is not None:
                cache.keep(self.summary)       # found once: kept with the summary
        for (k, which) in wanted:
            done = st.MedianOfMagnitudes()
            done.counts, done.wanted, done.value = None, {}, self.summary.medians[k][which]
            plan.medians[(k, which)] = done
        for k, bands in enumerate(plan.bands):
            for key, band in bands.items():
                if not band.thr:
                    continue
                first = band.chain[band.thr[0]]
                before = band.chain[:band.thr[0]]
                if first.rule == "bayes" and all(e.op == "gain" for e in before):
                    g = float(np.prod([e.gain for e in before])) if before else 1.0
                    sums = st.SquareSum()
                    sums.count = self.summary.bands[k][key].count
                    sums.total = float(np.sum(self.summary.bands[k][key].tables[0][2])) * g * g
                    band.gather = (0, sums)
        if not plan.resolve():
            def report(p, fed, text):
                if progress:
                    progress(min(1.0, fed / max(1, self.n)), text)
            _thresholds(_Source(self.path, self.channel), self.spec, plan, report)
        return plan

    def thresholds(self, k: int = 0) -> dict:
        """Each band's thresholds in chain order (signal units), as worked out."""
        return {key: list(b.lams) for key, b in self.plan.bands[k].items() if b.lams}

    # ------------------------------------------------------------------ stretches

    def synthesise(self, t0: int, t1: int, keep_coefficients: bool = True,
                   plan=None) -> Span:
        """Exact original and cleaned samples ``t0 .. t1`` (clipped to the recording), with
        the current edits (or those of ``plan``, one ``self.plan`` was)."""
        plan = self.plan if plan is None else plan
        from scalesieve.stream.dwt import InverseStream, stretch

        n, spec, level = self.n, self.spec, self.spec.level
        t0, t1 = max(0, int(t0)), min(n, int(t1))
        if t1 <= t0:
            empty = np.zeros((0, self.channels))
            return Span(t0, t0, empty, empty.copy(), [{} for _ in range(self.channels)])
        if spec.mode in WRAP_MODES:
            return self._wrapped(t0, t1, keep_coefficients, plan)
        first, last = stretch(n, spec, t0, t1)
        starts = [first[level]] + [first[level - i + 1] for i in range(1, level + 1)]
        x, made = self._forward(t0, t1, first, last)
        cleaned = np.empty((t1 - t0, self.channels))
        kept: list = [{} for _ in range(self.channels)]
        for k in range(self.channels):
            def out(s0, seg, k=k):
                cleaned[s0 - t0:s0 - t0 + seg.shape[0], k] = seg
            inv = InverseStream(n, spec, out, start=t0, stop=t1, band_starts=starts)
            bands = plan.bands[k]
            for step in made[k]:
                if step is None:                 # as the cascade was fed: pump between
                    inv.pump()
                    continue
                key, k0, c = step
                e = bands[key].edited(c, k0)
                if keep_coefficients:
                    kept[k].setdefault(key, []).append((k0, np.array(e, dtype=np.float64)))
                inv.put(key, k0, e)
        coefficients = [self._within(kept[k], t0, t1) for k in range(self.channels)]
        return Span(t0, t1, x[t0 - first[0]:t1 - first[0]].copy(), cleaned, coefficients)

    def _forward(self, t0: int, t1: int, first: list, last: list) -> tuple:
        """The samples and every channel's raw coefficients for outputs ``t0 .. t1``, in the
        order the cascade made them (``None`` where a block of samples ended); the last
        stretch's are kept, so another edit on the same view only edits and synthesises."""
        from scalesieve.stream.dwt import ForwardStream

        got = self._last_forward              # one read: another thread may replace it
        if got is not None and got[0] == (t0, t1):
            return got[1], got[2]
        x = self.reader.read(first[0], last[0])
        made: list = [[] for _ in range(self.channels)]
        for k in range(self.channels):
            def put(key, k0, c, steps=made[k]):
                steps.append((key, k0, np.array(c, dtype=np.float64)))
            fwd = ForwardStream(self.n, self.spec, put, first=first, last=last)
            col = np.ascontiguousarray(x[:, k])
            for a in range(0, col.shape[0], FEED):
                fwd.feed(col[a:a + FEED])
                made[k].append(None)
        self._last_forward = ((t0, t1), x, made)
        return x, made

    def _shown(self, key, t0: int, t1: int) -> tuple[int, int]:
        """The coefficients of band ``key`` positioned in ``t0 .. t1`` (a coarse band seen
        close up: the one nearest the stretch's middle)."""
        count = tf.band_lengths(self.n, self.spec)[tf.band_index(key, self.spec.level)]
        sl = tf.coefficient_slice(key, self.spec, count, t0, t1 - 1)
        if sl.stop > sl.start:
            return sl.start, sl.stop
        step, shift = tf._position_formula(key, self.spec)
        a = int(np.clip(np.rint((0.5 * (t0 + t1) - shift) / step), 0, count - 1))
        return a, a + 1

    def _wrapped(self, t0: int, t1: int, keep_coefficients: bool, plan) -> Span:
        """``synthesise`` in a mode that wraps (``longview.wrapped``)."""
        from scalesieve.longview.wrapped import WrappedStretch

        x = self.reader.read(t0, t1)
        cleaned = np.empty((t1 - t0, self.channels))
        keys = [*range(1, self.spec.level + 1), "a"]
        shown = {key: self._shown(key, t0, t1) for key in keys}
        coefficients: list = []
        for k in range(self.channels):
            bands = plan.bands[k]
            ws = WrappedStretch(lambda a, b, k=k: self.reader.read(a, b)[:, k], self.n,
                                self.spec)
            out, edited = ws.synthesise(t0, t1, lambda key, k0, v, b=bands: b[key].edited(v, k0),
                                        {key: [ab] for key, ab in shown.items()}
                                        if keep_coefficients else None)
            cleaned[:, k] = out
            coefficients.append({key: (a, edited[key].take(np.arange(a, b)))
                                 for key, (a, b) in shown.items()} if keep_coefficients else {})
        return Span(t0, t1, x.copy(), cleaned, coefficients)

    def _within(self, parts: dict, t0: int, t1: int) -> dict:
        out = {}
        lengths = tf.band_lengths(self.n, self.spec)
        for key, blocks in parts.items():
            k0 = blocks[0][0]
            values = np.concatenate([v for _, v in blocks])
            count = lengths[tf.band_index(key, self.spec.level)]
            sl = tf.coefficient_slice(key, self.spec, count, t0, t1 - 1)
            a, b = max(sl.start, k0), min(sl.stop, k0 + values.shape[0])
            if b <= a:
                # a coarse band seen close up: the coefficient nearest the stretch's middle
                step, shift = tf._position_formula(key, self.spec)
                a = int(np.clip(np.rint((0.5 * (t0 + t1) - shift) / step), k0,
                                k0 + values.shape[0] - 1))
                b = a + 1
            out[key] = (a, values[a - k0:b - k0])
        return out

    # ------------------------------------------------------------------ the whole file

    def export(self, output: str, *, removed: str | None = None, subtype: str | None = None,
               force: bool = False, progress=None) -> dict:
        """The edits over the whole recording into ``output`` (atomically), in blocks."""
        from scalesieve.stream.pipeline import clean_stream

        return clean_stream(self.path, output, transform=self.spec, edits=self.edits,
                            removed=removed, subtype=subtype, force=force,
                            channel=self.channel, progress=progress)

    def close(self) -> None:
        from scalesieve.longview.cache import let_go

        self.reader.close()
        self._last_forward = None
        let_go(self.summary)


def open_long(path: str, spec: tf.TransformSpec, channel: int | None = None,
              progress=None, cancelled=None) -> tuple[LongRecording, str]:
    """A ``LongRecording`` of ``path``, its summary kept or built: ``(recording, how)``."""
    from scalesieve.longview.cache import summary_for
    from scalesieve.stream.pipeline import open_source

    src = open_source(path, channel)
    try:
        spec = spec.resolved(src.frames)
    except ValueError as exc:
        raise ScalesieveError(str(exc), path) from None
    why = why_not_long(spec)
    if why is not None:
        raise ScalesieveError(why, path)
    summary, how = summary_for(path, spec, src.pick, progress, cancelled)
    return LongRecording(path, spec, summary, src.pick), how
