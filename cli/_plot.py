"""Terminal line plots in braille dots (2 x 4 dots per character cell), drawn with rich."""

from __future__ import annotations

import math

import numpy as np
from rich.text import Text

_DOT = ((0x01, 0x08), (0x02, 0x10), (0x04, 0x20), (0x40, 0x80))  # (row, column) -> braille bit


def _ticks(lo: float, hi: float, n: int = 5):
    span = hi - lo
    if span <= 0:
        return [lo]
    raw = span / n
    mag = 10 ** math.floor(math.log10(raw))
    step = max(m * mag for m in (1, 2, 2.5, 5) if m * mag <= raw * 1.0000001)
    start = math.ceil(lo / step) * step
    return [start + k * step for k in range(int((hi - start) / step + 1e-9) + 1)]


class BrailleCanvas:
    """A width x height character canvas over data ranges ``xlim`` x ``ylim``."""

    def __init__(self, width: int, height: int, xlim, ylim):
        self.w, self.h = width, height
        self.xlim, self.ylim = xlim, ylim
        self.bits = np.zeros((height, width), dtype=np.int32)
        self.style = np.full((height, width), "", dtype=object)

    def _dot(self, px: int, py: int, style: str):
        if 0 <= px < 2 * self.w and 0 <= py < 4 * self.h:
            row, col = py // 4, px // 2
            self.bits[row, col] |= _DOT[py % 4][px % 2]
            self.style[row, col] = style

    def line(self, x, y, style: str, dotted: bool = False):
        """Draw y(x) as a connected curve; ``dotted`` skips every other dot column."""
        (x0, x1), (y0, y1) = self.xlim, self.ylim
        px = np.arange(2 * self.w)
        xs = x0 + (px + 0.5) / (2 * self.w) * (x1 - x0)
        ys = np.interp(xs, x, y)
        py = np.rint((y1 - ys) / (y1 - y0) * (4 * self.h - 1)).astype(int)
        prev = None
        for i, (c, r) in enumerate(zip(px, py)):
            if dotted and i % 3 == 2:
                prev = r
                continue
            lo, hi = (r, r) if prev is None else (min(prev, r), max(prev, r))
            for rr in range(lo, hi + 1):
                self._dot(int(c), int(rr), style)
            prev = r

    def render(self, ylabel: str = "", xlabel: str = "") -> Text:
        (x0, x1), (y0, y1) = self.xlim, self.ylim
        yt = {int(round((y1 - v) / (y1 - y0) * (self.h - 1))): v for v in _ticks(y0, y1, max(3, self.h // 3))}
        out = Text()
        if ylabel or xlabel:
            out.append(f"{ylabel} against {xlabel}\n" if xlabel else f"{ylabel}\n", style="dim")
        for row in range(self.h):
            label = f"{yt[row]:7.2f} ┤" if row in yt else "        │"
            out.append(label, style="dim")
            for col in range(self.w):
                b = int(self.bits[row, col])
                out.append(chr(0x2800 + b) if b else " ", style=self.style[row, col] or None)
            out.append("\n")
        axis = [" "] * self.w
        labels = [" "] * (self.w + 8)
        for v in _ticks(x0, x1, max(2, self.w // 12)):
            c = int(round((v - x0) / (x1 - x0) * (self.w - 1)))
            axis[c] = "┬"
            s = f"{v:g}"
            start = max(0, min(c + 8 - len(s) // 2, len(labels) - len(s)))
            labels[start:start + len(s)] = list(s)
        out.append("        └" + "".join(axis).replace(" ", "─") + "\n", style="dim")
        out.append("".join(labels).rstrip() + "\n", style="dim")
        return out
