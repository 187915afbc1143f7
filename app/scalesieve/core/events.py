"""Transients at fine scales: find, time-stamp and measure events; repetition.

A coefficient of detail level j is an *exceedance* when ``|c| > k * sigma_j``
with ``sigma_j = median(|d_j|) / 0.6745`` taken over that level's own
coefficients (Donoho & Johnstone 1994; per-level noise as in Johnstone &
Silverman 1997).  On white Gaussian noise every coefficient of an orthonormal
transform is then an exceedance with probability ``2 (1 - Phi(k))``.

Time extent of one coefficient
------------------------------
A coefficient reads a stretch of samples: the support of its filter,
``(L-1)(2**j-1)+1`` samples at level j for a filter of length L (found
exactly by ``support``).  That stretch is its extent: whatever made the
coefficient exceed lies inside it.  Merging by the support keeps one impact
one event: the ringing of a struck housing makes ``|c|`` dip below the
threshold at every zero crossing, and the supports bridge those dips.  With
the narrower extent of half a dyadic step either side of the centre, the
demo pump recording (348 impacts and one knock) gave 433 events, with the
support 349.  The price is that ``start_s`` comes before the onset by about
half a support (db4, level 2: 11 samples) - a bound, not a bias to
correct: the event holds its cause.

Exceedances whose extents overlap or touch (share a sample or sit next to
each other), across all chosen levels, merge into one event.  An event's
``start_s``/``stop_s`` are the first and last sample of the union of its
extents, ``score`` the largest ``|c| / sigma_j`` in it, ``level`` and
``peak_s`` the level and centre (``transforms.coefficient_positions``) of
that coefficient, and ``peak`` the largest absolute sample of the signal
from ``start_s`` to ``stop_s``.  Only coefficients that read samples of the
recording alone count, for the noise and for exceedances: the others see
the boundary extension (for the SWT, the wrap-around from the other end,
where a drifting signal jumps), not the data.  So nothing is found within
one filter support of either end.

DWT or SWT
----------
Measured with db4, levels 1-2, k = 5 (``tests/core/test_events.py`` has the
invented bursts): on 56 invented bursts at 20 kHz the SWT's start times
scatter by 0.02 ms (standard deviation about their mean offset), the DWT's
by 0.10 ms; on the demo pump recording the SWT scatters by 0.04 ms against
0.20 ms, and all 349 true onsets lie inside an event, against 296
for the DWT, which sees the signal only at every 2**j-th position and
misses 13 impacts outright.  The SWT is therefore the
default for events.  Its coefficients of white noise are Gaussian with a
per-level variance (sigma^2 / 2**j for the normalised transform), which
sigma_j measures, so the per-coefficient false-alarm rate is the same
2 (1 - Phi(k)); neighbouring SWT coefficients are correlated, so their
exceedances come in clumps that merge.

Repetition
----------
``repetition(times)`` finds the dominant interval of a train of events (the
median interval, refined by a least-squares fit of event times against their
cycle numbers, so a missed event or a stray one does not move it), its rate
in Hz and the spread of the single intervals.

References
----------
D. L. Donoho and I. M. Johnstone, "Ideal spatial adaptation by wavelet
shrinkage", Biometrika 81:425-455, 1994.
I. M. Johnstone and B. W. Silverman, "Wavelet threshold estimators for data
with correlated noise", JRSS-B 59:319-351, 1997.
G. P. Nason and B. W. Silverman, "The stationary wavelet transform and some
statistical applications", in Wavelets and Statistics, Springer LNS 103, 1995.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import asdict, dataclass
from functools import lru_cache
from typing import Mapping, NamedTuple, Sequence

import numpy as np
import pywt

from scalesieve.core import thresholds as th
from scalesieve.core import transforms as tf

DEFAULT_LEVELS = (1, 2)
DEFAULT_K = 5.0
#: the transform events use unless told otherwise (see "DWT or SWT" above)
DEFAULT_KIND = "swt"
#: event fields in contract order (JSON keys and CSV columns)
FIELDS = ("start_s", "stop_s", "peak_s", "level", "peak", "score", "channel")

#: an interval belongs to the train when within this share of a whole number of periods
TRAIN_TOLERANCE = 0.15
#: fewest events that make a train
TRAIN_MIN_EVENTS = 3
#: a train is regular: robust spread of its single intervals at most this share of the period
TRAIN_MAX_SPREAD = 0.05


class Event(NamedTuple):
    """One transient.  Times in seconds from the start of the recording.

    A named tuple: long lists of events (low k on a long recording) are
    built quickly and compare field by field.
    """

    start_s: float
    stop_s: float
    peak_s: float
    level: int
    peak: float
    score: float
    channel: int

    def to_json(self) -> dict:
        return dict(zip(FIELDS, self))


@dataclass(frozen=True)
class LevelBand:
    """One detail level ready for detection.

    ``coeffs`` holds only the coefficients that read samples of the recording
    alone (see the module notes); the first of them is coefficient ``index0``
    of the level.  Coefficient ``i`` (of the whole level) is centred at
    sample ``centre0 + step * i`` and reads the samples
    ``step * i + reach[0]`` ... ``step * i + reach[1]``.
    ``sigma`` is the MAD noise level of ``coeffs``.
    """

    level: int
    coeffs: np.ndarray
    index0: int
    step: int
    centre0: float
    reach: tuple[int, int]
    sigma: float


@dataclass(frozen=True)
class Repetition:
    """The dominant interval of a train of events.

    ``interval_s`` is the least-squares period, ``rate_hz`` its inverse.
    ``spread_s`` is the robust standard deviation (1.4826 x MAD) of the
    single intervals (each divided by its whole number of periods);
    ``spread_hz`` is the same spread carried to the rate
    (``rate * spread_s / interval_s``, first order).  ``count`` is how many events belong to the train, ``intervals``
    how many intervals measured it.
    """

    interval_s: float
    rate_hz: float
    spread_s: float
    spread_hz: float
    count: int
    intervals: int

    def to_json(self) -> dict:
        return asdict(self)


# --------------------------------------------------------------------------
# checking the settings


def check_k(k) -> float:
    """k as a float; ValueError unless a finite positive number."""
    try:
        v = float(k)
    except (TypeError, ValueError):
        raise ValueError(f"k {k!r} is not a number") from None
    if not (v > 0 and math.isfinite(v)):
        raise ValueError(f"k {k!r} must be a finite number above 0 (in units of sigma)")
    return v


def check_levels(levels, depth: int, deepest: int | None = None) -> tuple[int, ...]:
    """Detail levels to search, sorted; ``details``/``all`` mean every detail level.

    ValueError for the approximation or a level the transform does not have;
    ``deepest`` (the most the data allow) makes that message say what to do.
    """
    if isinstance(levels, str):
        if levels in ("details", "all"):
            return tuple(range(1, depth + 1))
        raise ValueError(f"levels {levels!r}: use numbers, a range, 'details' or 'all'")
    out = []
    for v in levels:
        if v == "a":
            raise ValueError("events are found in detail levels; the approximation 'a' "
                             "holds the slow part of the signal, not transients")
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < 1:
            raise ValueError(f"level {v!r} is not a detail level (1 is the finest)")
        if v > depth:
            if deepest is not None and v > deepest:
                hint = f"the recording is too short for it (at most level {deepest} here)"
            elif deepest is not None:
                hint = (f"decompose to level {v} or deeper (the data allow up to {deepest}), "
                        f"or search fewer levels")
            else:
                hint = "decompose deeper or search fewer levels"
            raise ValueError(f"level {v} is not in the transform (it has detail levels "
                             f"1-{depth}); {hint}")
        if int(v) not in out:
            out.append(int(v))
    if not out:
        raise ValueError("no levels given")
    return tuple(sorted(out))


# --------------------------------------------------------------------------
# the coefficients detection needs


def detail_bands(x: np.ndarray, spec: tf.TransformSpec, levels: Sequence[int]) -> dict:
    """Detail coefficients of ``levels``, equal to those of ``transforms.forward``.

    Only the levels up to the deepest one asked for are computed (both
    transforms go level by level), so detection in levels 1-2 costs two
    levels of transform, not ``spec.level``.  The SWT is padded as
    ``forward`` pads it (to a multiple of ``2**spec.level``), so the numbers
    are the same bits the Scale map shows.
    """
    x = np.asarray(x, dtype=np.float64)
    top = max(levels)
    if spec.kind == "dwt":
        coeffs = pywt.wavedec(x, spec.wavelet, mode=spec.mode, level=top)
    else:
        n = x.shape[0]
        total = tf.swt_padded_length(n, spec.level)
        if total != n:
            x = pywt.pad(x, (0, total - n), tf._swt_pad_mode(spec.mode))
        with warnings.catch_warnings():
            # PyWavelets warns that a biorthogonal SWT does not preserve energy;
            # detection measures each level against its own noise, so it does not matter.
            warnings.simplefilter("ignore", UserWarning)
            coeffs = pywt.swt(x, spec.wavelet, level=top, trim_approx=True, norm=True)
    # PyWavelets order [a_top, d_top, ..., d_1]
    return {j: coeffs[top - j + 1] for j in levels}


def prepare(bands: Mapping[int, np.ndarray], spec: tf.TransformSpec, n: int) -> list[LevelBand]:
    """Positions, extents and noise of each level's coefficients.

    Parameters
    ----------
    bands : mapping level -> coefficient array (as ``transforms.forward`` gives)
    spec : resolved TransformSpec the coefficients come from
    n : number of samples of the recording
    """
    out = []
    for j in sorted(bands):
        c = np.asarray(bands[j], dtype=np.float64)
        # Positions rise by a fixed step (2**j for the DWT, 1 for the SWT), so
        # two of them describe the level without an array per coefficient.
        p = tf.coefficient_positions(j, spec, 2)
        centre0, step = float(p[0]), int(round(p[1] - p[0]))
        reach = support(spec, j)
        # keep the coefficients that read only samples of the recording
        i0 = min(c.shape[0], max(0, -(reach[0] // step)))
        i1 = min(c.shape[0], max(i0, (n - 1 - reach[1]) // step + 1))
        inside = c[i0:i1]
        out.append(LevelBand(level=int(j), coeffs=inside, index0=i0, step=step,
                             centre0=centre0, reach=reach,
                             sigma=th.mad_sigma(np.asarray(inside, dtype=np.float64))))
    return out


#: samples per block in the passes over a whole level (fits a core's cache)
_BLOCK = 1 << 16


def _exceedances(c: np.ndarray, limit: float) -> np.ndarray:
    """Indices i with |c[i]| > limit, in one cache-sized pass (no full-length temporary)."""
    out = []
    buf = np.empty(min(_BLOCK, c.size))
    for i in range(0, c.size, _BLOCK):
        a = np.abs(c[i:i + _BLOCK], out=buf[: min(_BLOCK, c.size - i)])
        hit = np.flatnonzero(a > limit)
        if hit.size:
            out.append(hit + i)
    return np.concatenate(out) if out else np.zeros(0, dtype=np.int64)


@lru_cache(maxsize=256)
def _support(kind: str, wavelet: str, mode: str, j: int) -> tuple[int, int]:
    step = 2 ** j if kind == "dwt" else 1
    L = tf.filter_length(wavelet)
    N = 2 ** j * max(64, 8 * L)
    m0 = N // 2
    offs: list[int] = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")      # energy warnings for biorthogonal SWT
        for s in range(step):
            x = np.zeros(N)
            x[m0 + s] = 1.0
            if kind == "dwt":
                d = pywt.wavedec(x, wavelet, mode=mode, level=j)[1]
            else:
                d = pywt.swt(x, wavelet, level=j, trim_approx=True, norm=True)[1]
            offs.extend(int(m0 + s - step * k) for k in np.flatnonzero(d))
    return min(offs), max(offs)


def support(spec: tf.TransformSpec, j: int) -> tuple[int, int]:
    """Sample offsets ``(first, last)`` a level-j coefficient reads, from its index.

    Coefficient ``i`` reads samples ``step * i + first`` ... ``step * i + last``
    (``step`` = 2**j for the DWT, 1 for the SWT).  Found by transforming unit
    impulses, so it is exact for every wavelet and boundary mode away from
    the edges: ``(L - 1)(2**j - 1) + 1`` samples for a filter of length L.
    """
    mode = spec.mode if spec.kind == "dwt" else "periodization"
    return _support(spec.kind, spec.wavelet, mode, int(j))


def prepare_signal(x: np.ndarray, spec: tf.TransformSpec, levels: Sequence[int]) -> list[LevelBand]:
    """``prepare(detail_bands(x, spec, levels), spec, len(x))``."""
    return prepare(detail_bands(x, spec, levels), spec, int(np.asarray(x).shape[0]))


# --------------------------------------------------------------------------
# detection


def detect(bands: Sequence[LevelBand], x: np.ndarray, rate: float, k: float,
           channel: int = 0) -> list[Event]:
    """Events of one channel from prepared levels (see the module notes).

    Parameters
    ----------
    bands : levels from ``prepare``
    x : the channel's samples (for ``peak``)
    rate : sample rate in Hz
    k : threshold in units of each level's sigma
    channel : index stored in every event

    Returns
    -------
    list of Event, in time order.
    """
    k = check_k(k)
    x = np.asarray(x)
    runs = [r for r in (_level_runs(b, k) for b in bands) if r is not None]
    return events_from_runs(runs, x.shape[0], rate, channel,
                            lambda s0, s1: _peak_between(x, s0, s1))


def events_from_runs(runs: Sequence, n: int, rate: float, channel: int, peaks) -> list[Event]:
    """Events from the runs of every level (``_level_runs``), merged across levels.

    ``peaks(s0, s1)`` gives the signal's largest ``|x|`` over each event's
    samples ``s0[i] .. s1[i]`` (disjoint, in order): from the samples in
    memory, or from a pass over a file too long to hold.
    """
    if not runs:
        return []
    first, last, score, level, centre = (np.concatenate(col) for col in zip(*runs))
    first = np.clip(first, 0, n - 1)
    last = np.clip(last, 0, n - 1)
    if len(runs) > 1:
        order = np.argsort(first, kind="stable")
        first, last, score = first[order], last[order], score[order]
        level, centre = level[order], centre[order]
    # A new event starts where an extent begins after every earlier one has
    # ended; extents that share a sample or are next to each other merge.
    reach = np.maximum.accumulate(last)
    new = np.empty(first.shape[0], dtype=bool)
    new[0] = True
    new[1:] = first[1:] > reach[:-1] + 1
    starts = np.flatnonzero(new)
    ends = np.append(starts[1:], first.shape[0])
    s0 = first[starts]
    s1 = reach[ends - 1]
    # strongest member of each event: sort by (event, score), take the last of each
    group = np.cumsum(new) - 1
    b = np.lexsort((score, group))[ends - 1]
    peaks = peaks(s0, s1)
    # columns to Python numbers first: building many events stays cheap
    return list(map(Event, (s0 / rate).tolist(), (s1 / rate).tolist(),
                    (centre[b] / rate).tolist(), level[b].tolist(), peaks.tolist(),
                    score[b].tolist(), [int(channel)] * starts.shape[0]))


def _level_runs(b: LevelBand, k: float):
    """Exceedances of one level, already merged where they touch within the level.

    Within a level the extents follow the coefficient order, so runs of
    touching extents are found in one pass; merging across levels then sorts
    runs, not single coefficients (an impact makes dozens of SWT
    exceedances).  Returns (first, last, best score, level, centre of the
    best) per run, or None.
    """
    if b.sigma <= 0.0 or b.coeffs.size == 0:
        return None  # a silent level has no noise to exceed
    idx = _exceedances(b.coeffs, k * b.sigma)
    if idx.size == 0:
        return None
    i = idx.astype(np.int64) + b.index0
    first = b.step * i + b.reach[0]
    last = b.step * i + b.reach[1]
    score = np.abs(b.coeffs[idx]) / b.sigma
    new = np.empty(i.shape[0], dtype=bool)
    new[0] = True
    new[1:] = first[1:] > last[:-1] + 1
    starts = np.flatnonzero(new)
    ends = np.append(starts[1:], i.shape[0])
    top = np.maximum.reduceat(score, starts)
    # the first coefficient of each run that reaches the run's top score
    group = np.cumsum(new) - 1
    hit = np.flatnonzero(score == top[group])
    keep = np.empty(hit.shape[0], dtype=bool)
    keep[0] = True
    keep[1:] = group[hit[1:]] != group[hit[:-1]]
    best = hit[keep]
    return (first[starts], last[ends - 1], top, np.full(starts.shape[0], b.level, dtype=np.int64),
            b.centre0 + b.step * i[best].astype(np.float64))


def _peak_between(x: np.ndarray, s0: np.ndarray, s1: np.ndarray) -> np.ndarray:
    """Largest |x[i]| for s0 <= i <= s1, per event (events disjoint, in order)."""
    # Gather the samples of the events only (they are usually a small part
    # of the recording), then one reduceat gives each event's maximum.
    lengths = s1 - s0 + 1
    offsets = np.cumsum(lengths) - lengths
    idx = np.arange(int(lengths.sum()), dtype=np.int64) + np.repeat(s0 - offsets, lengths)
    return np.maximum.reduceat(np.abs(x[idx]), offsets)


def find_events(x: np.ndarray, rate: float, spec: tf.TransformSpec,
                levels: Sequence[int] = DEFAULT_LEVELS, k: float = DEFAULT_K,
                channel: int = 0) -> tuple[list[Event], list[LevelBand]]:
    """Transform, prepare and detect in one call (one channel).

    ``spec`` must be resolved (its level set).  Returns the events and the
    prepared levels (for their noise sigmas).
    """
    lv = check_levels(levels, int(spec.level))
    bands = prepare_signal(x, spec, lv)
    return detect(bands, x, rate, k, channel), bands


def detect_channels(prepared: Mapping[int, Sequence[LevelBand]], signal, rate: float,
                    k: float) -> tuple[list[Event], list[dict]]:
    """Events of several channels, in time order, and the noise of each level.

    Parameters
    ----------
    prepared : mapping channel -> levels from ``prepare``
    signal : callable(channel) -> that channel's samples
    rate : sample rate in Hz
    k : threshold in units of each level's sigma

    Returns
    -------
    (events sorted by start then channel, ``[{"level", "sigma", "channel"}, ...]``)
    """
    found: list[Event] = []
    noise: list[dict] = []
    for c in sorted(prepared):
        found.extend(detect(prepared[c], signal(c), rate, k, c))
        noise.extend({"level": b.level, "sigma": b.sigma, "channel": int(c)}
                     for b in prepared[c])
    found.sort(key=lambda e: (e.start_s, e.channel))
    return found, noise


# --------------------------------------------------------------------------
# repetition


def repetition(times: Sequence[float], tolerance: float = TRAIN_TOLERANCE,
               min_events: int = TRAIN_MIN_EVENTS) -> Repetition | None:
    """Dominant interval of a train of event times, or None when there is no train.

    Steps: (1) the median of consecutive intervals is a first period T
    (robust while fewer than half the events are missed or stray);
    (2) a walk through the events in time order links each one to the last
    event of the train when their distance is within ``tolerance`` of a
    whole number m >= 1 of periods (m = 2: one event was missed); of two
    events closer than half a period the one that continues the train
    better is kept; an event out of step starts a new run only when the
    next one is in step with it (the train resumed), else it is a stray;
    (3) the period is the least-squares slope of event times against their
    cycle numbers, one offset per run.  Steps 2-3 run twice, the second
    time with the fitted period.  The spread is the robust standard
    deviation (1.4826 x MAD) of the single intervals ``distance / m``.

    Returns None with fewer than ``min_events`` events in the train, when
    fewer than half of the intervals between events are train links, or
    when the spread exceeds ``TRAIN_MAX_SPREAD`` of the period (irregular
    events can fit a loose period by chance; a machine's or a pulse's train
    is far steadier).
    """
    t = np.sort(np.asarray(times, dtype=np.float64))
    if t.shape[0] < max(min_events, 3):
        return None
    dt = np.diff(t)
    pos = dt[dt > 0]
    if pos.shape[0] < 2:
        return None
    period = float(np.median(pos))
    for _ in range(2):
        cycles, runs = _walk(t, period, tolerance)
        fitted = _slope(t, cycles, runs)
        if fitted is None:
            return None
        period = fitted
    members = runs >= 0
    # links: consecutive members of one run
    idx = np.flatnonzero(members)
    same = runs[idx[1:]] == runs[idx[:-1]]
    d = (t[idx[1:]] - t[idx[:-1]])[same]
    m = (cycles[idx[1:]] - cycles[idx[:-1]])[same]
    links = int(d.shape[0])
    count = int(np.count_nonzero(np.isin(runs, np.flatnonzero(np.bincount(runs[members]) >= 2))))
    if count < min_events or links < max(2, 0.5 * (t.shape[0] - 1)):
        return None
    single = d / m
    spread = float(1.4826 * np.median(np.abs(single - np.median(single))))
    if spread > TRAIN_MAX_SPREAD * period:
        return None
    return Repetition(interval_s=period, rate_hz=1.0 / period, spread_s=spread,
                      spread_hz=spread / (period * period), count=count, intervals=links)


def repetition_by_channel(events: Sequence[Event], channels: int) -> tuple[dict | None, list]:
    """Repetition of each channel's events (from their starts) and the clearest train.

    Returns ``(best, per_channel)``: ``per_channel[c]`` is the train of
    channel c as a dict (``Repetition`` fields plus ``"channel"``) or None;
    ``best`` is the one with the most events in its train (the lower
    channel on a tie), or None.  Starts are used because they follow the
    onset, where the strongest coefficient wanders within a ringing impact.
    """
    per: list = []
    for c in range(channels):
        rep = repetition([e.start_s for e in events if e.channel == c])
        per.append(None if rep is None else {"channel": c, **rep.to_json()})
    found = [r for r in per if r is not None]
    best = max(found, key=lambda r: (r["count"], -r["channel"])) if found else None
    return best, per


def _walk(t: np.ndarray, period: float, tol: float) -> tuple[np.ndarray, np.ndarray]:
    """Cycle number and run of each event of a train (-1: not in the train)."""
    n = t.shape[0]
    cycles = np.full(n, -1, dtype=np.int64)
    runs = np.full(n, -1, dtype=np.int64)
    run = 0
    cycles[0], runs[0] = 0, 0
    anchor, prev, pending = 0, None, None
    lim = tol * period
    for i in range(1, n):
        d = t[i] - t[anchor]
        m = int(round(d / period))
        if m >= 1 and abs(d - m * period) <= lim:
            cycles[i], runs[i] = cycles[anchor] + m, run
            prev, anchor, pending = anchor, i, None
            continue
        if m == 0:
            # two events within half a period: keep the one in step with the train
            if prev is not None:
                step = (cycles[anchor] - cycles[prev]) * period
                if abs(t[i] - t[prev] - step) < abs(t[anchor] - t[prev] - step):
                    cycles[i], runs[i] = cycles[anchor], run
                    cycles[anchor], runs[anchor] = -1, -1
                    anchor = i
            continue
        if pending is not None:
            d2 = t[i] - t[pending]
            m2 = int(round(d2 / period))
            if m2 >= 1 and abs(d2 - m2 * period) <= lim:
                run += 1
                cycles[pending], runs[pending] = 0, run
                cycles[i], runs[i] = m2, run
                prev, anchor, pending = pending, i, None
                continue
        pending = i
    return cycles, runs


def _slope(t: np.ndarray, cycles: np.ndarray, runs: np.ndarray) -> float | None:
    """Least-squares period: time against cycle number with one offset per run."""
    sel = runs >= 0
    tt, cc, rr = t[sel], cycles[sel].astype(np.float64), runs[sel]
    _, inv, counts = np.unique(rr, return_inverse=True, return_counts=True)
    tc = tt - (np.bincount(inv, tt) / counts)[inv]
    ccn = cc - (np.bincount(inv, cc) / counts)[inv]
    den = float(np.sum(ccn * ccn))
    if den <= 0:
        return None
    T = float(np.sum(ccn * tc) / den)
    return T if T > 0 else None
