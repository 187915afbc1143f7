"""What a threshold does to one band: the spread of |c|/σ with the cut shaded.

A small histogram of log10(|c| / σ) over the band's coefficients (σ: the
band's own noise estimate, median|c|/0.6745), the part below the cut λ/σ
shaded (what the threshold removes or shrinks), and the share of
coefficients kept (|c| > λ) printed.  λ comes from ``model.threshold_for``.
"""

from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtGui import QBrush, QColor

from scalesieve.gui.resource_files import colour

#: histogram bins over log10(|c|/σ)
BINS = 48
#: at most this many coefficients go into the histogram (an even stride beyond);
#: the share kept is always counted over every coefficient
HIST_SAMPLE = 1 << 20


def spread(c: np.ndarray, sigma: float, lam: float):
    """(bin edges of log10(|c|/σ), counts, cut = λ/σ, share of |c| > λ)."""
    a = np.abs(np.asarray(c, dtype=float))
    kept = float(np.count_nonzero(a > lam)) / a.size if a.size else 0.0
    cut = lam / sigma if sigma > 0 else math.inf
    if a.size > HIST_SAMPLE:
        a = a[:: a.size // HIST_SAMPLE]
    s = sigma if sigma > 0 else (float(np.max(a)) or 1.0)
    r = a[a > 0] / s
    if r.size == 0:
        return np.linspace(-2, 2, BINS + 1), np.zeros(BINS), cut, kept
    lo = min(float(np.log10(r.min())), math.log10(cut) - 0.5 if cut > 0 and
             math.isfinite(cut) else 0.0)
    lo = max(lo, -4.0)
    hi = max(float(np.log10(r.max())), math.log10(cut) + 0.2 if cut > 0 and
             math.isfinite(cut) else 1.0)
    counts, edges = np.histogram(np.log10(np.maximum(r, 10.0 ** lo)), bins=BINS, range=(lo, hi))
    return edges, counts.astype(float), cut, kept


class ThresholdSpread(pg.PlotWidget):
    """The spread of one thresholded band; ``show_band(c, σ, λ)``."""

    def __init__(self, parent=None):
        super().__init__(parent, background=colour("plot", "background"))
        pi = self.getPlotItem()
        pi.hideButtons()
        pi.setMenuEnabled(False)
        pi.hideAxis("left")
        pi.layout.setContentsMargins(2, 2, 2, 0)
        ax = pi.getAxis("bottom")
        ax.setHeight(16)
        self.setMouseEnabled(x=False, y=False)
        self.bars = pg.PlotDataItem(stepMode="center", fillLevel=0,
                                    brush=QBrush(QColor(colour("traces", "band"))),
                                    pen=pg.mkPen(colour("traces", "band"), width=1))
        self.cut_region = pg.LinearRegionItem(movable=False,
                                              brush=QBrush(QColor(180, 54, 127, 60)),
                                              pen=pg.mkPen(QColor(180, 54, 127), width=1))
        self.cut_line = pg.InfiniteLine(angle=90, movable=False,
                                        pen=pg.mkPen(QColor(180, 54, 127), width=1.5))
        self.caption_text = ""
        pi.addItem(self.cut_region)
        pi.addItem(self.bars)
        pi.addItem(self.cut_line)
        ticks = [(float(k), f"{10.0 ** k:g}") for k in range(-4, 4)]
        ax.setTicks([ticks, []])
        self.cut = math.nan
        self.kept = math.nan
        self.setToolTip("spread of |c|/σ of this band (log axis); shaded: below the cut λ/σ, "
                        "removed (hard) or shrunk (soft)")

    def show_band(self, c: np.ndarray, sigma: float, lam: float) -> None:
        edges, counts, cut, kept = spread(c, sigma, lam)
        self.cut, self.kept = cut, kept
        self.bars.setData(edges, counts)
        lc = math.log10(cut) if cut > 0 and math.isfinite(cut) else edges[0]
        self.cut_region.setRegion((edges[0], lc))
        self.cut_line.setPos(lc)
        top = float(counts.max()) if counts.size else 1.0
        pi = self.getPlotItem()
        pi.setXRange(edges[0], edges[-1], padding=0)
        pi.setYRange(0, top * 1.25 or 1.0, padding=0)
        self.caption_text = f"cut λ = {cut:.3g} σ · kept {100 * kept:.3g} % of coefficients"

    def caption(self) -> str:
        return self.caption_text

