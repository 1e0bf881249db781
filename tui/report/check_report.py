"""The HTML report of `padtune check`: pass/fail banner, the verdict table, and per key the hands-off
delta (with the noise limit band and the threshold) and the histograms of hands-off and touched deltas."""

from __future__ import annotations

from html import escape
from typing import Any

import numpy as np

from processing.acceptance import UnitProbe
from processing.session import Session
from tui.report import html
from tui.report.plots import delta_plot, histogram_plot

COLUMNS = [("name", "key"), ("verdict", "verdict"), ("baseline", "baseline"), ("noise_pp", "noise pp"),
           ("noise_rms", "noise RMS"), ("signal", "signal"), ("snr", "SNR pp"), ("reason", "reason")]


def build_check_report(report: dict[str, Any], probe: UnitProbe, session: Session) -> str:
    t_s, _, deltas, _ = probe.arrays()
    limits = report["limits"]
    rows = []
    for ch in report["channels"]:
        rows.append({**ch, "verdict": "PASS" if ch["passed"] else "FAIL",
                     "status": "pass" if ch["passed"] else "fail", "reason": "; ".join(ch["reasons"]) or "-"})
    verdict = "PASS" if report["passed"] else "FAIL"
    limit_text = ", ".join(f"{k} {v}" for k, v in limits.items() if v is not None) or "none set"
    if any(ch.get("limits", limits) != limits for ch in report["channels"]):
        limit_text += " (the profile's [limits]; some channels have their own, each plot shows its own)"
    body = [f"<p class=\"banner {verdict.lower()}\" data-field=\"verdict\">{verdict}</p>",
            f"<p class=\"sub\">limits: {escape(limit_text)}</p>",
            f"<h2>Channels</h2>{html.table(COLUMNS, rows, row_class='status')}"]
    for row in rows:
        c, name = row["index"], row["name"]
        s = session.settings(c)
        own_pp = row.get("limits", limits).get("max_noise_pp_counts")  # the channel's own limit
        d = deltas[:, c] if deltas.size else np.zeros(0)
        touched = np.array(probe.touch_samples.get(c, []), float)
        figures = [
            html.figure(delta_plot(t_s, d, float(s.threshold_counts), float(s.release_level_counts),
                                   title=f"{name}: hands-off delta",
                                   noise_limit_pp_counts=own_pp),
                        name, "delta", f"{name}: delta with hands off, threshold and release level"),
            # Hands off is not "untouched": a stuck key or a stray touch shows in it.
            html.figure(histogram_plot(d, touched, float(s.threshold_counts), title=f"{name}: deltas",
                                       labels=("hands off", "touched")),
                        name, "histogram", f"{name}: hands-off deltas and touched deltas (with --touch)"),
        ]
        body.append(f'<section data-key="{escape(name)}"><h2>{escape(name)}: {escape(row["verdict"])}</h2>'
                    f"{html.table(COLUMNS, [row], row_class='status')}"
                    f"<div class=\"figures\">{''.join(figures)}</div></section>")
    subtitle = (f"{report['port']} ({report.get('board') or 'unnamed board'}), profile {report['profile']}, "
                f"{report['duration_s']:g} s hands off" + (", touch step" if report["touch"] else ""))
    return html.page("padtune production check", subtitle, body)


def write_check_report(path: str, report: dict[str, Any], probe: UnitProbe, session: Session) -> None:
    html.write_page(path, build_check_report(report, probe, session))
