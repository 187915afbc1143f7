"""A rolling-element bearing's characteristic frequencies, and where they show.

For n rolling elements of diameter d on a pitch diameter D with contact
angle phi, at shaft rate f_r (Randall & Antoni 2011, eqs. 1-4):

* FTF  = f_r / 2 (1 - d/D cos phi)             (cage, fundamental train)
* BPFO = n f_r / 2 (1 - d/D cos phi)           (ball pass, outer race)
* BPFI = n f_r / 2 (1 + d/D cos phi)           (ball pass, inner race)
* BSF  = D f_r / (2 d) (1 - (d/D cos phi)^2)   (ball spin)

The figures assume rolling without slip; real bearings slip by 1-2 %
(Randall & Antoni 2011, sect. 2), which is why lines are matched to a peak
within a tolerance, not to an exact bin: ``MIN_BINS`` resolution bins (the
spectrum cannot place a peak closer) plus ``SLIP_SHARE`` of the line's
frequency (slip).  One peak goes to one line at most: where two lines'
tolerances reach the same peak, the line whose expected frequency is nearest
keeps it, the other is left unmatched and flagged ``ambiguous``.  A peak
counts only where it stands out of the floor more than noise would: the
envelope spectrum of a noise-like envelope has bins of about Rayleigh
distributed magnitude, whose median m gives sigma = m / sqrt(2 ln 2); the
largest of K bins passes a sqrt(2 ln(K / p)) sigma level with probability
about p, and a peak must pass it with p = ``FALSE_ALARM`` over the K bins of
its tolerance window.

References
----------
R. B. Randall and J. Antoni, "Rolling element bearing diagnostics - A
tutorial", Mech. Syst. Signal Process. 25:485-520, 2011.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from scalesieve.core import envelope as env

NAMES = ("ftf", "bpfo", "bpfi", "bsf")
#: harmonics of each line that are marked and matched
HARMONICS = 3
#: a line matches the largest peak within this many resolution bins ...
MIN_BINS = 3
#: ... plus this share of its frequency for slip (Randall & Antoni 2011 give
#: 1-2 % as typical; the lower end, as the tolerance adds the bins to it)
SLIP_SHARE = 0.01
#: chance that noise alone puts a bin over the match level within a tolerance window
FALSE_ALARM = 0.01


@dataclass(frozen=True)
class Geometry:
    elements: int
    element_d: float
    pitch_d: float
    angle_deg: float = 0.0

    def validate(self) -> "Geometry":
        if isinstance(self.elements, bool) or int(self.elements) != self.elements \
                or self.elements < 1:
            raise ValueError(f"rolling elements {self.elements!r} must be a whole number >= 1")
        for name, v in (("element diameter", self.element_d), ("pitch diameter", self.pitch_d)):
            if not (math.isfinite(v) and v > 0):
                raise ValueError(f"{name} {v!r} must be a positive number")
        if not self.element_d < self.pitch_d:
            raise ValueError(f"element diameter {self.element_d:g} must be smaller than the "
                             f"pitch diameter {self.pitch_d:g}")
        if not (math.isfinite(self.angle_deg) and 0 <= self.angle_deg < 90):
            raise ValueError(f"contact angle {self.angle_deg!r} must be 0 to below 90 degrees")
        return self


def parse_geometry(text: str) -> Geometry:
    """``N,d,D,ANGLE`` (elements, element and pitch diameter in one unit, degrees)."""
    parts = [p.strip() for p in str(text).split(",")]
    if len(parts) != 4:
        raise ValueError(f"bearing {text!r} is not N,d,D,ANGLE (for example 9,7.5,34.7,0)")
    try:
        n = int(parts[0])
        d, big_d, angle = (float(p) for p in parts[1:])
    except ValueError:
        raise ValueError(f"bearing {text!r} is not N,d,D,ANGLE (numbers, N whole)") from None
    return Geometry(n, d, big_d, angle).validate()


def frequencies(g: Geometry, shaft_hz: float) -> dict:
    """FTF, BPFO, BPFI, BSF in Hz (Randall & Antoni 2011, eqs. 1-4)."""
    g.validate()
    if not (math.isfinite(shaft_hz) and shaft_hz > 0):
        raise ValueError(f"shaft rate {shaft_hz!r} must be a positive number of Hz")
    r = g.element_d / g.pitch_d * math.cos(math.radians(g.angle_deg))
    fr = float(shaft_hz)
    return {"ftf_hz": fr / 2 * (1 - r),
            "bpfo_hz": g.elements * fr / 2 * (1 - r),
            "bpfi_hz": g.elements * fr / 2 * (1 + r),
            "bsf_hz": g.pitch_d * fr / (2 * g.element_d) * (1 - r * r)}


def lines(freqs_hz: dict, shaft_hz: float, harmonics: int = HARMONICS) -> list[dict]:
    """Every marked line: harmonics 1..h of each frequency, and BPFI's shaft sidebands."""
    out = []
    for name in NAMES:
        f = freqs_hz[f"{name}_hz"]
        for h in range(1, harmonics + 1):
            out.append({"name": name, "harmonic": h, "sideband": 0, "hz": h * f})
            if name == "bpfi":
                # an inner-race defect turns with the shaft: its lines are modulated by f_r
                for s in (-1, 1):
                    out.append({"name": name, "harmonic": h, "sideband": s,
                                "hz": h * f + s * shaft_hz})
    return out


def tolerance_hz(f: float, resolution_hz: float) -> float:
    """How far from its expected ``f`` a line's peak may lie (module docstring)."""
    return MIN_BINS * resolution_hz + SLIP_SHARE * abs(f)


def noise_ratio(bins: int, false_alarm: float = FALSE_ALARM) -> float:
    """Over the floor's median, the level the largest of ``bins`` Rayleigh bins passes
    with probability ``false_alarm`` (Rayleigh: P(A > a) = exp(-a^2 / 2 sigma^2),
    median sigma sqrt(2 ln 2))."""
    return math.sqrt(2 * math.log(max(1, bins) / false_alarm)) / math.sqrt(2 * math.log(2))


def match(marked: list[dict], freqs: np.ndarray, amp: np.ndarray) -> list[dict]:
    """Each line with the peak near it that it alone claims, and how far it stands out.

    ``found_hz``/``amplitude``: the largest local maximum within
    ``tolerance_hz`` that passes ``noise_ratio`` times the floor;
    ``snr_db``: 20 log10 of its amplitude over the floor, the median
    amplitude of the spectrum from 5 to 20 tolerances either side.  A peak
    claimed by several lines goes to the one whose expected frequency is
    nearest; the others get None and ``"ambiguous": True`` (every row has
    ``ambiguous``).  None where no maximum qualifies or the line is beyond
    the spectrum.
    """
    res = float(freqs[1] - freqs[0]) if freqs.shape[0] > 1 else 1.0
    peaks = env.local_maxima(amp)
    out = []
    claims = {}          # peak index -> rows that chose it
    for line in marked:
        f = line["hz"]
        tol = tolerance_hz(f, res)
        row = dict(line, found_hz=None, amplitude=None, snr_db=None, ambiguous=False)
        out.append(row)
        if f - tol > freqs[-1] or f <= 0:
            continue
        d = np.abs(freqs - f)
        floor_mask = (d >= 5 * tol) & (d <= 20 * tol) & (freqs > 0)
        floor = float(np.median(amp[floor_mask])) if floor_mask.any() else 0.0
        level = floor * noise_ratio(int(np.count_nonzero(d <= tol)))
        near = peaks[(np.abs(freqs[peaks] - f) <= tol) & (amp[peaks] > level)]
        if near.size:
            i = int(near[np.argmax(amp[near])])
            row["found_hz"] = float(freqs[i])
            row["amplitude"] = float(amp[i])
            row["snr_db"] = (20 * math.log10(amp[i] / floor) if floor > 0 and amp[i] > 0
                             else None)
            claims.setdefault(i, []).append(row)
    for i, rows in claims.items():
        if len(rows) > 1:
            keep = min(rows, key=lambda r: abs(r["hz"] - float(freqs[i])))
            for r in rows:
                if r is not keep:
                    r.update(found_hz=None, amplitude=None, snr_db=None, ambiguous=True)
    return out
