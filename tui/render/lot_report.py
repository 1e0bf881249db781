"""The lot report as one self-contained HTML page (`padtune lot FILE.sqlite --report FILE.html`).

Plots are drawn here as inline SVG (no plotting library, no script, no network): the yield as one
stacked bar, failures by check and by channel as bars, and per channel a box plot of baseline, noise
pp and SNR over the units (box: quartiles; line: median; whiskers: min and max; dots: every unit).
Pure: a `LotSummary` in, the page's text out; the command writes it atomically.
"""

from __future__ import annotations

import html
import math
from collections.abc import Sequence

from processing.lot import Distribution, LotSummary

W = 720  # the plots' width in SVG units (they scale to the page)
BAR_H = 18
COLOURS = {"pass": "#2e7d32", "fail": "#c62828", "error": "#9e9e9e", "box": "#90caf9", "ink": "#263238"}
TITLES = {"baseline": "Baseline (counts)", "noise_pp": "Noise peak to peak (counts)", "snr": "SNR (pp)"}


def _e(text: object) -> str:
    return html.escape(str(text), quote=True)


def _svg(height: float, body: list[str], label: str) -> str:
    return (f'<svg viewBox="0 0 {W} {height:.0f}" width="100%" role="img" aria-label="{_e(label)}" '
            f'xmlns="http://www.w3.org/2000/svg" font-family="sans-serif" font-size="12">'
            + "".join(body) + "</svg>")


def yield_bar(s: LotSummary) -> str:
    """One bar split into passed, failed and not tested units, each part labelled with its count."""
    parts = [("pass", s.passed, "passed"), ("fail", s.judged - s.passed, "failed"),
             ("error", len(s.errors), "not tested")]
    total = sum(n for _, n, _ in parts) or 1
    x, body = 0.0, []
    for kind, n, word in parts:
        if not n:
            continue
        w = W * n / total
        body.append(f'<rect x="{x:.1f}" y="0" width="{w:.1f}" height="28" fill="{COLOURS[kind]}">'
                    f"<title>{n} {word}</title></rect>")
        if w > 60:
            body.append(f'<text x="{x + 6:.1f}" y="19" fill="white">{n} {word}</text>')
        x += w
    return _svg(28, body, "yield")


def bars(items: Sequence[tuple[str, int]], label: str) -> str:
    """Horizontal bars, one per (name, count), with the count written at the end."""
    if not items:
        return "<p>None.</p>"
    top = max(n for _, n in items) or 1
    left, body = 140, []
    for i, (name, n) in enumerate(items):
        y = i * (BAR_H + 6)
        w = (W - left - 50) * n / top
        body.append(f'<text x="{left - 6}" y="{y + 13}" text-anchor="end">{_e(name)}</text>'
                    f'<rect x="{left}" y="{y}" width="{w:.1f}" height="{BAR_H}" fill="{COLOURS["fail"]}"/>'
                    f'<text x="{left + w + 4:.1f}" y="{y + 13}">{n}</text>')
    return _svg(len(items) * (BAR_H + 6), body, label)


def _ticks(lo: float, hi: float, count: int = 5) -> list[float]:
    """Round tick values covering lo..hi (steps of 1, 2 or 5 times a power of ten)."""
    span = hi - lo or abs(hi) or 1.0
    raw = span / count
    mag = 10 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 5, 10) if m * mag >= raw)
    first = math.floor(lo / step) * step
    return [first + k * step for k in range(int((hi - first) / step) + 2)]


def _axis(known: Sequence[Distribution]) -> tuple[float, float]:
    """The shared axis: every channel's box and whiskers, except values far outside their own channel's
    quartiles (beyond 3 IQR: Tukey's 'far out' fence), which would squash the rest to a line."""
    lo = min(max(d.min, d.q1 - 3 * (d.q3 - d.q1)) for d in known)
    hi = max(min(d.max, d.q3 + 3 * (d.q3 - d.q1)) for d in known)
    lo, hi = min(lo, min(d.q1 for d in known)), max(hi, max(d.q3 for d in known))
    if hi == lo:
        lo, hi = lo - 1.0, hi + 1.0
    return lo, hi


def box_plot(names: Sequence[str], dists: Sequence[Distribution | None], label: str) -> str:
    """One row per channel: whiskers min..max, a box q1..q3, the median as a line, each unit a dot.
    Values off the axis (far outliers, such as a shorted pad) are a red mark at the edge with the value."""
    known = [d for d in dists if d is not None]
    if not known:
        return "<p>Not measured.</p>"
    ticks = _ticks(*_axis(known))
    lo, hi = ticks[0], ticks[-1]
    left, right, row = 110, 60, 22
    scale = (W - left - right) / ((hi - lo) or 1.0)
    x = lambda v: left + (min(max(v, lo), hi) - lo) * scale  # noqa: E731
    height = len(names) * row + 24
    ink = COLOURS["ink"]
    body = []
    for t in ticks:
        body.append(f'<line x1="{x(t):.1f}" y1="0" x2="{x(t):.1f}" y2="{height - 20}" stroke="#e0e0e0"/>'
                    f'<text x="{x(t):.1f}" y="{height - 6}" text-anchor="middle">{t:g}</text>')
    for i, (name, d) in enumerate(zip(names, dists, strict=True)):
        y = i * row + 11
        body.append(f'<text x="{left - 6}" y="{y + 4}" text-anchor="end">{_e(name)}</text>')
        if d is None:
            body.append(f'<text x="{left + 4}" y="{y + 4}" fill="#757575">not measured</text>')
            continue
        tip = (f"{name}: n {d.n}, min {d.min:g}, q1 {d.q1:g}, median {d.median:g}, q3 {d.q3:g}, "
               f"max {d.max:g}" + (f", sd {d.stdev:.3g}" if d.stdev is not None else ""))
        dots = "".join(f'<circle cx="{x(v):.1f}" cy="{y}" r="2" fill="{ink}" fill-opacity="0.6"/>'
                       for v in d.values if lo <= v <= hi)
        below, above = [v for v in d.values if v < lo], [v for v in d.values if v > hi]
        # A far value on the right goes in the right margin; on the left, just inside the axis (the
        # names are in the left margin), above the whisker.
        marks = "".join(f'<text x="{x(v) + 4:.1f}" y="{y + (4 if side > 0 else -3)}" font-size="10" '
                        f'fill="{COLOURS["fail"]}">{glyph} {v:g}</text>'
                        for v, side, glyph in ((min(below, default=None), -1, "◀"),
                                               (max(above, default=None), 1, "▶")) if v is not None)
        body.append(f'<g><title>{_e(tip)}</title>'
                    f'<line x1="{x(d.min):.1f}" y1="{y}" x2="{x(d.max):.1f}" y2="{y}" stroke="{ink}"/>'
                    f'<rect x="{x(d.q1):.1f}" y="{y - 7}" width="{max(x(d.q3) - x(d.q1), 1):.1f}" '
                    f'height="14" fill="{COLOURS["box"]}" stroke="{ink}"/>'
                    f'<line x1="{x(d.median):.1f}" y1="{y - 7}" x2="{x(d.median):.1f}" y2="{y + 7}" '
                    f'stroke="{ink}" stroke-width="2"/>{dots}{marks}</g>')
    return _svg(height, body, label)


def _pct(v: float | None) -> str:
    return "-" if v is None else f"{v:.1f} %"


def lot_html(s: LotSummary, source: str) -> str:
    """The whole page: figures in words, the plots, and the failed units with their reasons."""
    names = [c.name for c in s.channels]
    parts = [
        f"<h1>Lot report: {_e(source)}</h1>",
        f"<p>{s.units} units in {s.tests} tests: {s.passed} of {s.judged} judged units passed "
        f"(yield {_pct(s.yield_pct)}; first pass {_pct(s.first_pass_yield_pct)}), "
        f"{len(s.errors)} not tested. A retested unit counts once, by its latest test.</p>",
        yield_bar(s),
        "<h2>Failures by check</h2>", bars(list(s.failures_by_check.items()), "failures by check"),
        "<h2>Failures by channel</h2>",
        bars([(c.name, c.failed_units) for c in s.channels if c.failed_units], "failures by channel"),
    ]
    for m, title in TITLES.items():
        parts += [f"<h2>{_e(title)}</h2>",
                  box_plot(names, [c.measures.get(m) for c in s.channels], title)]
    parts.append("<h2>Failed units</h2>")
    if s.failed_units or s.errors:
        rows = "".join(f"<tr><td>{_e(u.key)}</td><td>{_e(u.port)}</td><td>{_e(u.started_utc)}</td>"
                       f"<td>{_e(u.status)}</td><td>{_e(u.reason or '')}</td></tr>"
                       for u in [*s.failed_units, *s.errors])
        parts.append("<table><tr><th>unit</th><th>port</th><th>tested (UTC)</th><th>status</th>"
                     f"<th>reason</th></tr>{rows}</table>")
    else:
        parts.append("<p>None.</p>")
    style = ("body{font-family:sans-serif;max-width:760px;margin:2em auto;color:#263238}"
             "table{border-collapse:collapse}td,th{border:1px solid #cfd8dc;padding:2px 6px;text-align:left}"
             "svg{margin:0.5em 0}")
    return ("<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\"><title>padtune lot report</title>"
            f"<style>{style}</style></head><body>" + "\n".join(parts) + "</body></html>\n")
