"""A rolling-element bearing's characteristic frequencies, and where they show.

For n rolling elements of diameter d on a pitch diameter D with contact
angle phi, at shaft rate f_r (Randall & Antoni 2011, eqs. 1-4):

* FTF  = f_r / 2 (1 - d/D cos phi)             (cage, fundamental train)
* BPFO = n f_r / 2 (1 - d/D cos phi)           (ball pass, outer race)
* BPFI = n f_r / 2 (1 + d/D cos phi)           (ball pass, inner race)
* BSF  = D f_r / (2 d) (1 - (d/D cos phi)^2)   (ball spin)

The figures assume rolling without slip; real bearings slip by 1-2 %
(Randall & Antoni 2011, sect. 2), which is why lines are matched to the
nearest peak within a tolerance, not to an exact bin.

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
#: a line matches the largest peak within this share of its frequency ...
SLIP_SHARE = 0.02
#: ... or within this many bins, whichever is wider (common practice: slip 1-2 %)
MIN_BINS = 3


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


def match(marked: list[dict], freqs: np.ndarray, amp: np.ndarray) -> list[dict]:
    """Each line with the largest local maximum near it, and how far it stands out.

    ``found_hz``/``amplitude``: the largest local maximum within the
    tolerance (``SLIP_SHARE`` of the line, at least ``MIN_BINS`` bins);
    ``snr_db``: 20 log10 of its amplitude over the median amplitude of the
    spectrum from 5 to 20 tolerances either side (the floor).  None where
    no maximum lies within the tolerance or the line is beyond the spectrum.
    """
    res = float(freqs[1] - freqs[0]) if freqs.shape[0] > 1 else 1.0
    peaks = env.local_maxima(amp)
    out = []
    for line in marked:
        f = line["hz"]
        tol = max(SLIP_SHARE * f, MIN_BINS * res)
        row = dict(line, found_hz=None, amplitude=None, snr_db=None)
        if f - tol > freqs[-1] or f <= 0:
            out.append(row)
            continue
        near = peaks[np.abs(freqs[peaks] - f) <= tol]
        if near.size:
            i = int(near[np.argmax(amp[near])])
            d = np.abs(freqs - f)
            floor_mask = (d >= 5 * tol) & (d <= 20 * tol) & (freqs > 0)
            floor = float(np.median(amp[floor_mask])) if floor_mask.any() else 0.0
            row["found_hz"] = float(freqs[i])
            row["amplitude"] = float(amp[i])
            row["snr_db"] = (20 * math.log10(amp[i] / floor) if floor > 0 and amp[i] > 0
                             else None)
        out.append(row)
    return out
