"""The lot report's own SVG drawing: well-formed, self-contained, and readable with a far outlier."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

from processing.lot import distribution, summarise
from processing.results_db import UnitRecord
from tui.render.lot_report import box_plot, lot_html


def _rec(unit: str, baselines: list[float], status: str = "pass") -> UnitRecord:
    chans = [{"name": f"k{i}", "index": i, "passed": status == "pass", "baseline": b, "noise_pp": 3.0,
              "snr": None, "checks": {"alive": "pass" if status == "pass" else "fail"}, "reasons": []}
             for i, b in enumerate(baselines)]
    return UnitRecord(port="p", started_utc="t", status=status, unit=unit, channels=chans)


def test_every_plot_is_well_formed_svg_and_nothing_is_fetched():
    s = summarise([_rec("A", [1000, 1500]), _rec("B", [1004, 1490]), _rec("C", [65535, 1495], "fail")])
    page = lot_html(s, "lot<1>.sqlite")
    svgs = re.findall(r"<svg.*?</svg>", page, re.S)
    assert len(svgs) == 5  # yield, by check, by channel, baseline, noise (SNR: not measured)
    for svg in svgs:
        ET.fromstring(svg)  # raises on a malformed drawing
    assert "lot&lt;1&gt;.sqlite" in page and "<script" not in page and "Not measured." in page


def test_a_far_outlier_does_not_squash_the_other_channels():
    near = distribution([1000, 1002, 1004, 1006])
    far = distribution([1490, 1495, 1500, 1492, 1497, 1493, 1499, 65535])
    svg = box_plot(["k0", "k1"], [near, far], "baseline")
    ticks = [float(t) for t in re.findall(r'text-anchor="middle">([-0-9.e+]+)<', svg)]
    assert max(ticks) < 2000  # the axis covers the boxes, not the shorted pad's 65535
    assert "▶ 65535" in svg  # which is still shown, at the edge, with its value
