"""Exact stretches of a long recording in the boundary modes that wrap (periodic, periodization).

In these modes coefficient o of a level is ``sum_i h[i] * xp[(2 o + r - i) mod Np]``
of the level above (``stream.wrap``: r = 1 and Np = m in ``periodic``;
r = L / 2, Np = m + m % 2 and the last value repeated in ``periodization``),
so a stretch near either end of the recording reads the other end.  Here
each level's needed coefficients are kept as a few runs of true indices
(a run that passes a level's end goes on at its start): the needs are worked
out from the outputs down (``needs``), the samples of the runs read, every
level made from the one above by one convolution per run (``forward``), the
chain of edits applied run by run, and the inverse made level by level the
same way: ``periodization``'s inverse wraps too (output s reads upsampled
coefficients ``(s + L/2 - 1 - i) mod 2K``), ``periodic``'s is the plain one
(``s + L - 2 - i``, nothing past either end).  The numbers are PyWavelets'
``wavedec`` and ``waverec`` of the whole recording within float round-off;
the cost follows the stretch, not the recording.
"""

from __future__ import annotations

import numpy as np
import pywt

from scalesieve.core import transforms as tf

WRAP_MODES = ("periodic", "periodization")


def _merge(runs: list) -> list:
    """Sorted, disjoint runs ``[(a, b), ...]`` covering ``runs``."""
    out: list = []
    for a, b in sorted(r for r in runs if r[1] > r[0]):
        if out and a <= out[-1][1]:
            out[-1] = (out[-1][0], max(out[-1][1], b))
        else:
            out.append((a, b))
    return out


class _Runs:
    """Values at the true indices of a few runs, looked up by index."""

    def __init__(self, runs: list, arrays: list):
        self.runs = runs
        self.starts = np.array([a for a, _ in runs], dtype=np.int64)
        self.offsets = np.concatenate([[0], np.cumsum([b - a for a, b in runs])]).astype(np.int64)
        self.values = np.concatenate(arrays) if arrays else np.zeros(0)

    def take(self, idx: np.ndarray) -> np.ndarray:
        p = np.searchsorted(self.starts, idx, side="right") - 1
        return self.values[self.offsets[p] + idx - self.starts[p]]


class WrappedStretch:
    """``pywt.wavedec`` / ``waverec`` of one channel in a wrapping mode, over stretches only.

    ``read(a, b)`` gives samples ``a .. b`` of the channel (float64).
    """

    def __init__(self, read, n: int, spec: tf.TransformSpec):
        if spec.mode not in WRAP_MODES:
            raise ValueError(f"mode {spec.mode} does not wrap")
        self.read, self.n, self.spec = read, n, spec
        self.w = pywt.Wavelet(spec.wavelet)
        self.L = self.w.dec_len
        self.J = spec.level
        self.periodization = spec.mode == "periodization"
        self.r = self.L // 2 if self.periodization else 1
        self.m = [n]
        for _ in range(self.J):
            self.m.append(pywt.dwt_coeff_len(self.m[-1], self.L, spec.mode))

    # ------------------------------------------------------------------ index runs

    def _np(self, j: int) -> int:
        m = self.m[j]
        return m + m % 2 if self.periodization else m

    def _wrap_runs(self, u0: int, u1: int, j: int) -> list:
        """Unwrapped indices ``u0 .. u1`` of level ``j``'s input as runs of true indices."""
        m, P = self.m[j], self._np(j)
        if u1 - u0 >= P:
            return [(0, m)]
        runs, u = [], u0
        while u < u1:
            base = (u // P) * P
            a, b = u - base, min(u1, base + P) - base
            runs.append((min(a, m - 1), min(b, m)))      # index m is the repeated m - 1
            u = base + b if b < P else base + P
        return runs

    def _parent(self, a: int, b: int) -> tuple[int, int]:
        """Unwrapped input indices coefficients ``a .. b`` of a level read from the level above."""
        return 2 * a + self.r - (self.L - 1), 2 * (b - 1) + self.r + 1

    def _coeff_span(self, s0: int, s1: int, j: int) -> tuple[int, int]:
        """Unwrapped coefficients of level ``j`` that outputs ``s0 .. s1`` of level j - 1 read."""
        q = self.L // 2 - 1 if self.periodization else self.L - 2
        k0 = (s0 + q - (self.L - 1)) // 2
        k1 = (s1 - 1 + q) // 2 + 1
        if not self.periodization:
            k0, k1 = max(0, k0), min(self.m[j], k1)
        return k0, k1

    def _coeff_runs(self, k0: int, k1: int, j: int) -> list:
        m = self.m[j]
        if not self.periodization:
            return [(k0, k1)]
        if k1 - k0 >= m:
            return [(0, m)]
        return [(a % m, (a % m) + (min(k1, (a // m + 1) * m) - a))
                for a in _starts(k0, k1, m)]

    # ------------------------------------------------------------------ forward

    def forward(self, wanted: dict) -> tuple[dict, dict]:
        """Coefficients of the runs ``wanted[key]`` (``key``: a level or ``"a"``), as
        ``({j: _Runs of d_j}, {j: _Runs of a_j})`` over what every level needed."""
        J = self.J
        need = {j: list(wanted.get(j, [])) for j in range(1, J + 1)}
        need[J] += list(wanted.get("a", []))
        for j in range(J, 1, -1):
            need[j] = _merge(need[j])
            for a, b in need[j]:
                need[j - 1] += self._wrap_runs(*self._parent(a, b), j - 1)
        need[1] = _merge(need[1])
        top = _merge([r for a, b in need[1] for r in self._wrap_runs(*self._parent(a, b), 0)])
        above = _Runs(top, [self.read(a, b) for a, b in top])
        details, approx = {}, {}
        lo, hi = self.w.dec_lo, self.w.dec_hi
        for j in range(1, J + 1):
            m_up, P = self.m[j - 1], self._np(j - 1)
            ca, cd = [], []
            for a, b in need[j]:
                u0, u1 = self._parent(a, b)
                idx = np.arange(u0, u1, dtype=np.int64) % P
                idx[idx >= m_up] = m_up - 1
                x = above.take(idx)
                ca.append(np.convolve(x, lo, "valid")[::2])
                cd.append(np.convolve(x, hi, "valid")[::2])
            details[j] = _Runs(need[j], cd)
            approx[j] = above = _Runs(need[j], ca)
        return details, approx

    # ------------------------------------------------------------------ the stretch

    def synthesise(self, t0: int, t1: int, edit, extra: dict | None = None):
        """Outputs ``t0 .. t1`` of the inverse of the edited coefficients.

        ``edit(key, k0, values)`` edits a run of band ``key`` starting at ``k0``;
        ``extra`` adds runs of coefficients to work out (the Scale map's).  Returns
        ``(outputs, edited)``, ``edited[key]`` a ``_Runs`` of edited coefficients.
        """
        J = self.J
        out_runs = {0: [(t0, t1)]}
        for j in range(1, J + 1):
            runs = []
            for s0, s1 in out_runs[j - 1]:
                runs += self._coeff_runs(*self._coeff_span(s0, s1, j), j)
            out_runs[j] = _merge(runs)
        wanted = {j: list(out_runs[j]) for j in range(1, J + 1)}
        wanted["a"] = list(out_runs[J])
        for key, runs in (extra or {}).items():
            wanted.setdefault(key, [])
            wanted[key] = wanted[key] + list(runs)
        details, approx = self.forward(wanted)
        edited = {}
        for key in [*range(1, J + 1), "a"]:
            src = approx[J] if key == "a" else details[key]
            edited[key] = _Runs(src.runs, [edit(key, a, src.take(np.arange(a, b)))
                                           for a, b in src.runs])
        rec = edited["a"]
        q = self.L // 2 - 1 if self.periodization else self.L - 2
        rlo, rhi = self.w.rec_lo, self.w.rec_hi
        for j in range(J, 0, -1):
            K = self.m[j]
            arrays = []
            for s0, s1 in out_runs[j - 1]:
                k0, k1 = self._coeff_span(s0, s1, j)
                kk = np.arange(k0, k1, dtype=np.int64)
                if self.periodization:
                    ca, cd = rec.take(kk % K), edited[j].take(kk % K)
                else:
                    ca, cd = rec.take(kk), edited[j].take(kk)
                u = np.zeros(2 * kk.shape[0])
                v = np.zeros(2 * kk.shape[0])
                u[0::2], v[0::2] = ca, cd
                full = np.convolve(u, rlo) + np.convolve(v, rhi)
                at = s0 + q - 2 * k0
                arrays.append(full[at:at + (s1 - s0)])
            rec = _Runs(out_runs[j - 1], arrays)
        return rec.take(np.arange(t0, t1, dtype=np.int64)), edited


def _starts(k0: int, k1: int, m: int) -> list:
    """Where the unwrapped run ``k0 .. k1`` crosses a multiple of ``m``: its pieces' starts."""
    out, a = [], k0
    while a < k1:
        out.append(a)
        a = (a // m + 1) * m
    return out
