"""The HTML report of `padtune tune`: per key the delta with threshold lines, the two histograms, the
figures and the suggestion with its reasons."""

from __future__ import annotations

from html import escape

from processing.tuning import TuneResult
from tui.headless.tuning import CROSSTALK_RULE, crosstalk_rows, result_rows
from tui.report import html
from tui.report.plot_data import histograms, sketches
from tui.report.plots import delta_plot_from, histogram_plot_from

COLUMNS = [("name", "key"), ("touches", "touches"), ("noise_pp", "noise pp"), ("noise_rms", "noise RMS"),
           ("noise_touched_pp", "touched noise pp"), ("noise_touched_rms", "touched noise RMS"),
           ("crosstalk_pct", "crosstalk % of threshold"), ("signal", "signal"), ("snr_pp", "SNR pp"),
           ("snr_rms", "SNR RMS"), ("verdict", "verdict"),
           ("threshold", "threshold"), ("hysteresis", "hysteresis"), ("touch_debounce", "touch debounce"),
           ("release_debounce", "release debounce")]


CROSSTALK_COLUMNS = [("source", "touching"), ("target", "moves"), ("shift", "by counts"),
                     ("share_pct", "% of its threshold"), ("frames", "frames"), ("flagged", "flagged"),
                     ("slider", "slider neighbours in")]


def build_tune_report(result: TuneResult) -> str:
    """The page: the plots' points come from three passes over the frames the result was measured from
    (`plot_data`: an envelope per key, then the histograms' ranges and counts), never a whole trace."""
    rows = result_rows(result)
    passes = result.passes
    stretches = [k.trace.stretches for k in result.keys]
    drawn = sketches(passes.source, passes.baselines.passes, stretches)
    counted = histograms(passes.baselines.passes, passes.touches.quiet, passes.touches.touched,
                         [float(k.after.threshold_counts) for k in result.keys])
    how = "from the recording's marks" if result.from_marks else "found in the deltas"
    cross = crosstalk_rows(result)
    body = [f"<h2>Summary</h2>{html.table(COLUMNS, rows)}",
            "<p class=\"reasons\">Noise: peak-to-peak and RMS (numpy.std) of untouched deltas, counts. "
            "Touched noise: the same of the touched deltas less a 0.2 s running median (the touch level). "
            "Signal: median touched delta. SNR = signal / noise (pp or RMS form). Verdict from SNR pp "
            "(common practice, no source: below 5 weak, 5-10 marginal, above 10 solid).</p>",
            "<h2>Crosstalk</h2>" + html.table(CROSSTALK_COLUMNS, cross, key_field="pair",
                                              text_fields=("source", "target", "flagged", "slider"))
            + f"<p class=\"reasons\">{escape(CROSSTALK_RULE)}.</p>"]
    for key, row, sketch, hist in zip(result.keys, rows, drawn, counted, strict=True):
        s = key.after
        threshold = float(s.threshold_counts)
        release = float(s.threshold_counts - s.hysteresis_counts)
        name = key.name
        figures = [
            html.figure(delta_plot_from(sketch.t_s, sketch.delta, sketch.spans_s, threshold, release,
                                        title=f"{name}: delta"), name, "delta",
                        f"{name}: delta over time, touches shaded, threshold and release level"),
            html.figure(histogram_plot_from(hist.bins, hist.quiet_counts, hist.touched_counts, threshold,
                                            title=f"{name}: untouched and touched"), name, "histogram",
                        f"{name}: histograms of untouched and touched deltas"),
        ]
        notes = [f"<li>verdict {escape(row['verdict'])} from {escape(row['basis'])}</li>"]
        if row["touched_tone"]:
            notes.append(f"<li>noise while touched: {escape(row['touched_tone'])}</li>")
        notes += [f"<li>{escape(k)}: {escape(v)}</li>" for k, v in row["reasons"].items()]  # type: ignore
        if row["refusal"]:
            notes.append(f"<li>no suggestion: {escape(str(row['refusal']))}</li>")
        if not row["measured"]:  # written with --partial: it keeps settings it was not measured for
            notes.append("<li>not measured: keeps its settings (marked measured = false in the profile "
                         "unless the base profile held it as measured)</li>")
        body.append(f'<section data-key="{escape(name)}"><h2>{escape(name)}</h2>'
                    f"{html.table(COLUMNS, [row])}<ul class=\"reasons\">{''.join(notes)}</ul>"
                    f"<div class=\"figures\">{''.join(figures)}</div></section>")
    subtitle = (f"{result.source}: {result.frames} frames at {result.rate_hz:g} Hz, touches {how}; "
                f"{len(result.keys)} keys")
    return html.page("padtune tuning report", subtitle, body)
