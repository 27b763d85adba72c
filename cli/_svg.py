"""Inline SVG charts for the review sheet: line plots, regime / V_bi maps and histograms, drawn
from the arrays the API returns. Plain strings, no library, no external asset."""

from __future__ import annotations

import math
from html import escape

import numpy as np

from ._plot import _ticks as linear_ticks
from ._render import REGIME_STYLE

MARGIN = (64, 16, 20, 46)  #: left, right, top, bottom [px]
VBI_SCALE = ("#2b1d3f", "#3b2f6b", "#33508f", "#1f7a99", "#1f9e8a", "#54b86a", "#a5cc4b", "#f0d83a")


def _colour(style: str) -> str:
    return style.split()[-1]


def log_ticks(lo: float, hi: float) -> list:
    """Tick values on a log axis: 1-2-5 steps over less than two decades, else powers of ten."""
    steps = (1, 2, 5) if hi / lo < 100 else (1,)
    out = []
    for e in range(math.floor(math.log10(lo)), math.ceil(math.log10(hi)) + 1):
        out += [m * 10.0 ** e for m in steps if lo <= m * 10.0 ** e <= hi * (1 + 1e-9)]
    return out


def tick_label(v: float) -> str:
    if v != 0 and (abs(v) >= 1e4 or abs(v) < 1e-2):
        m, e = f"{v:.1e}".split("e")
        return f"{m.rstrip('0').rstrip('.')}e{int(e)}"
    return f"{v:g}"


class Frame:
    """A plot area mapping data (xlim x ylim, either log) onto pixels."""

    def __init__(self, width, height, xlim, ylim, xlog=False, ylog=False):
        self.w, self.h, self.xlim, self.ylim, self.xlog, self.ylog = width, height, xlim, ylim, xlog, ylog
        self.x0, self.x1 = MARGIN[0], width - MARGIN[1]
        self.y0, self.y1 = height - MARGIN[3], MARGIN[2]

    def _t(self, v, lim, log):
        a, b = lim
        if log:
            v, a, b = np.log10(v), math.log10(a), math.log10(b)
        return (np.asarray(v, dtype=float) - a) / (b - a)

    def px(self, x):
        return self.x0 + self._t(x, self.xlim, self.xlog) * (self.x1 - self.x0)

    def py(self, y):
        return self.y0 + self._t(y, self.ylim, self.ylog) * (self.y1 - self.y0)

    def axes(self, xlabel, ylabel) -> str:
        parts = [f'<rect x="{self.x0}" y="{self.y1}" width="{self.x1 - self.x0}" height="{self.y0 - self.y1}" '
                 'fill="none" stroke="#444"/>']
        xt = log_ticks(*self.xlim) if self.xlog else linear_ticks(*self.xlim, 6)
        yt = log_ticks(*self.ylim) if self.ylog else linear_ticks(*self.ylim, 5)
        last = -1e9
        for v in xt:
            x = float(self.px(v))
            parts.append(f'<line x1="{x:.1f}" y1="{self.y0}" x2="{x:.1f}" y2="{self.y0 + 4}" stroke="#444"/>')
            if x - last > 44:  # labels never touch
                parts.append(f'<text x="{x:.1f}" y="{self.y0 + 16}" text-anchor="middle">{tick_label(v)}</text>')
                last = x
        for v in yt:
            y = float(self.py(v))
            parts.append(f'<line x1="{self.x0 - 4}" y1="{y:.1f}" x2="{self.x0}" y2="{y:.1f}" stroke="#444"/>'
                         f'<text x="{self.x0 - 6}" y="{y + 4:.1f}" text-anchor="end">{tick_label(v)}</text>')
        parts.append(f'<text x="{(self.x0 + self.x1) / 2:.0f}" y="{self.h - 8}" text-anchor="middle">'
                     f'{escape(xlabel)}</text>')
        parts.append(f'<text transform="translate(14 {(self.y0 + self.y1) / 2:.0f}) rotate(-90)" '
                     f'text-anchor="middle">{escape(ylabel)}</text>')
        return "".join(parts)


def _svg(width, height, body, label) -> str:
    return (f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height}" width="{width}" '
            f'height="{height}" role="img" aria-label="{escape(label)}" font-family="sans-serif" font-size="11">'
            f'<title>{escape(label)}</title>{body}</svg>')


def line_plot(series, xlabel, ylabel, label, width=640, height=320, xlim=None, ylim=None, bands=()) -> str:
    """``series``: (x, y, colour, dash, name) tuples; ``bands``: (x_from, x_to, colour) shading."""
    xs = np.concatenate([np.asarray(s[0], float) for s in series])
    ys = np.concatenate([np.asarray(s[1], float) for s in series])
    xlim = xlim or (float(xs.min()), float(xs.max()))
    pad = 0.06 * (float(ys.max()) - float(ys.min()) or 1.0)
    ylim = ylim or (float(ys.min()) - pad, float(ys.max()) + pad)
    f = Frame(width, height, xlim, ylim)
    body = []
    for a, b, colour in bands:
        body.append(f'<rect x="{float(f.px(a)):.1f}" y="{f.y1}" width="{float(f.px(b) - f.px(a)):.1f}" '
                    f'height="{f.y0 - f.y1}" fill="{colour}" fill-opacity="0.10"/>')
    for k, (x, y, colour, dash, name) in enumerate(series):
        pts = " ".join(f"{px:.1f},{py:.1f}" for px, py in zip(f.px(np.asarray(x, float)), f.py(np.asarray(y, float))))
        body.append(f'<polyline class="series" data-name="{escape(name)}" points="{pts}" fill="none" '
                    f'stroke="{colour}" stroke-width="{1.2 if dash else 2}"'
                    + (f' stroke-dasharray="{dash}"' if dash else "") + "/>")
        ly = f.y1 + 14 + 14 * k
        if k == 0:
            body.append(f'<rect x="{f.x1 - 196}" y="{f.y1 + 2}" width="192" height="{14 * len(series) + 4}" '
                        'fill="white" fill-opacity="0.85" stroke="#ccc"/>')
        body.append(f'<line x1="{f.x1 - 190}" y1="{ly - 4}" x2="{f.x1 - 170}" y2="{ly - 4}" stroke="{colour}" '
                    f'stroke-width="2"' + (f' stroke-dasharray="{dash}"' if dash else "") + "/>"
                    f'<text x="{f.x1 - 165}" y="{ly}">{escape(name)}</text>')
    return _svg(width, height, f.axes(xlabel, ylabel) + "".join(body), label)


def _edges(v, log):
    v = np.log10(v) if log else np.asarray(v, float)
    mid = 0.5 * (v[1:] + v[:-1])
    e = np.concatenate([[2 * v[0] - mid[0]], mid, [2 * v[-1] - mid[-1]]])
    return 10 ** e if log else e


def grid_map(m, what, label, width=520, height=300) -> str:
    """The regime (``what="regime"``) or V_bi (``"vbi"``) panel of ``radialpn.regime_map``'s
    answer: cells, regime boundaries, the design (◆), a legend or a colour scale in volts."""
    xs, ys = m["x_values"], m["y_values"]
    xe, ye = _edges(xs, m["x_log"]), _edges(ys, m["y_log"])
    room = 110 if what == "regime" else 70  # the legend's or the colour scale's width [px]
    f = Frame(width - room, height, (xe[0], xe[-1]), (ye[0], ye[-1]), m["x_log"], m["y_log"])
    reg, vbi = m["regime"], m["vbi_V"]
    finite = vbi[np.isfinite(vbi)]
    lo, hi = (float(finite.min()), float(finite.max())) if finite.size else (0.0, 1.0)
    hi = hi if hi > lo else lo + 1e-9
    body = []
    for j in range(ys.size):
        for i in range(xs.size):
            x0, x1, y0, y1 = f.px(xe[i]), f.px(xe[i + 1]), f.py(ye[j + 1]), f.py(ye[j])
            if what == "regime":
                fill = _colour(REGIME_STYLE[reg[j, i]][0]) if reg[j, i] in REGIME_STYLE else "#bbbbbb"
                tip = reg[j, i] or "no answer"
            else:
                v = vbi[j, i]
                fill = (VBI_SCALE[min(int((v - lo) / (hi - lo) * len(VBI_SCALE)), len(VBI_SCALE) - 1)]
                        if math.isfinite(v) else "#bbbbbb")
                tip = f"{v:.3f} V" if math.isfinite(v) else "no answer"
            body.append(f'<rect class="cell" x="{x0:.1f}" y="{y0:.1f}" width="{x1 - x0 + 0.3:.1f}" '
                        f'height="{y1 - y0 + 0.3:.1f}" fill="{fill}"><title>{xs[i]:.3g} × {ys[j]:.3g}: {tip}</title>'
                        "</rect>")
    for j in range(ys.size):
        for i in range(xs.size):
            if i + 1 < xs.size and reg[j, i] != reg[j, i + 1]:
                x = f.px(xe[i + 1])
                body.append(f'<line x1="{x:.1f}" y1="{f.py(ye[j]):.1f}" x2="{x:.1f}" y2="{f.py(ye[j + 1]):.1f}" '
                            'stroke="black" stroke-width="1.2"/>')
            if j + 1 < ys.size and reg[j, i] != reg[j + 1, i]:
                y = f.py(ye[j + 1])
                body.append(f'<line x1="{f.px(xe[i]):.1f}" y1="{y:.1f}" x2="{f.px(xe[i + 1]):.1f}" y2="{y:.1f}" '
                            'stroke="black" stroke-width="1.2"/>')
    if m["mark"] is not None:
        j, i = m["mark"]
        cx, cy = f.px(xs[i]), f.py(ys[j])
        body.append(f'<path class="design" d="M{cx:.1f},{cy - 7:.1f} L{cx + 7:.1f},{cy:.1f} L{cx:.1f},{cy + 7:.1f} '
                    f'L{cx - 7:.1f},{cy:.1f} Z" fill="white" stroke="black" stroke-width="1.5"><title>the design'
                    "</title></path>")
    x_legend = width - room + 8
    if what == "regime":
        for k, (r, (style, glyph, _)) in enumerate(REGIME_STYLE.items()):
            y = f.y1 + 16 * k
            body.append(f'<rect x="{x_legend}" y="{y}" width="10" height="10" fill="{_colour(style)}"/>'
                        f'<text x="{x_legend + 13}" y="{y + 9}" font-size="9">{glyph} {escape(r)}</text>')
    else:
        n = len(VBI_SCALE)
        h = (f.y0 - f.y1) / n
        for k, c in enumerate(VBI_SCALE):
            body.append(f'<rect x="{x_legend}" y="{f.y0 - (k + 1) * h:.1f}" width="12" height="{h + 0.3:.1f}" '
                        f'fill="{c}"/>')
        for v in linear_ticks(lo, hi, 4):
            y = f.y0 - (v - lo) / (hi - lo) * (f.y0 - f.y1)
            body.append(f'<text class="scale" x="{x_legend + 15}" y="{y + 4:.1f}" font-size="9">{v:.2f}</text>')
        body.append(f'<text x="{x_legend + 6}" y="{f.y1 - 6}" font-size="9" text-anchor="middle">V_bi [V]</text>')
    axes = f.axes("core radius a [nm]" if m["x_column"] == "core_radius_nm" else m["x_column"],
                  "shell thickness t [nm]" if m["y_column"] == "shell_thickness_nm" else m["y_column"])
    return _svg(width, height, "".join(body) + axes, label)


def histogram(values, label, xlabel, width=640, height=220, bins=40, marker=None) -> str:
    """Bars of a sample's distribution; ``marker`` (value, text) draws a vertical line."""
    v = np.asarray(values, float)
    v = v[np.isfinite(v)]
    counts, edges = np.histogram(v, bins=bins)
    top = max(int(counts.max()), 1)
    xlim = (float(edges[0]), float(edges[-1]))
    if marker is not None:
        xlim = (min(xlim[0], marker[0]), max(xlim[1], marker[0]))
    f = Frame(width, height, xlim if xlim[1] > xlim[0] else (xlim[0] - 1e-3, xlim[0] + 1e-3), (0, top * 1.05))
    body = []
    for c, a, b in zip(counts, edges[:-1], edges[1:]):
        x0, x1 = f.px(a), f.px(b)
        body.append(f'<rect class="bar" x="{x0:.1f}" y="{f.py(c):.1f}" width="{max(x1 - x0 - 0.5, 0.5):.1f}" '
                    f'height="{f.y0 - f.py(c):.1f}" fill="#1f9e8a"/>')
    if marker is not None:
        x = f.px(marker[0])
        body.append(f'<line x1="{x:.1f}" y1="{f.y0}" x2="{x:.1f}" y2="{f.y1}" stroke="#d9534f" stroke-width="1.5" '
                    f'stroke-dasharray="5 3"/><text x="{x - 4:.1f}" y="{f.y1 + 12}" fill="#d9534f" text-anchor="end">'
                    f'{escape(marker[1])}</text>')
    return _svg(width, height, "".join(body) + f.axes(xlabel, "growth runs"), label)
