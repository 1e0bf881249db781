"""Building the report page: escaping, tables with machine-readable cells, and the page shell.

Every value cell carries `data-field`, every key's row and figures carry `data-key`, so a script (and
the tests) can read the numbers back without scraping text. The page has its own small stylesheet and
nothing it loads from anywhere: it opens from disk in any browser, offline.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from html import escape
from typing import Any

STYLE = """
body { font-family: system-ui, sans-serif; margin: 1.5rem auto; max-width: 72rem; color: #1d2329;
       background: #fcfcfa; line-height: 1.4; }
h1 { font-size: 1.5rem; margin-bottom: 0.2rem; } h2 { font-size: 1.15rem; margin-top: 2rem; }
.sub { color: #59636e; margin-top: 0; }
table { border-collapse: collapse; margin: 0.8rem 0; font-variant-numeric: tabular-nums; }
th, td { border-bottom: 1px solid #d5d9dd; padding: 0.25rem 0.6rem; text-align: right; }
th { background: #eef1f3; } td.text, th.text { text-align: left; }
tr.fail td { background: #fbe9e7; } tr.pass td.verdict { color: #1b6e2d; font-weight: 600; }
tr.fail td.verdict { color: #a32014; font-weight: 600; }
.figures { display: flex; flex-wrap: wrap; gap: 0.8rem; }
figure { margin: 0; } figure svg { max-width: 100%; height: auto; }
figcaption { color: #59636e; font-size: 0.85rem; }
.reasons { color: #3b444d; font-size: 0.92rem; margin: 0.2rem 0 0.8rem 0; }
.banner { padding: 0.5rem 0.8rem; border-radius: 4px; font-weight: 600; display: inline-block; }
.banner.pass { background: #e3f4e6; color: #1b6e2d; } .banner.fail { background: #fbe9e7; color: #a32014; }
.caution { color: #59636e; font-size: 0.85rem; border-top: 1px solid #d5d9dd; margin-top: 2rem; }
"""

CAUTION = ("Touch keys are not safety controls. Isolate the USB link from boards that are not isolated "
           "from the mains, and defer to local codes, appliance standards and licensed practice.")


def fmt(value: Any, digits: int = 1) -> str:
    if value is None:
        return "-"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return "inf" if math.isinf(value) else f"{value:.{digits}f}"
    return str(value)


def table(columns: Sequence[tuple[str, str]], rows: Sequence[Mapping[str, Any]], key_field: str = "name",
          row_class: str | None = None, text_fields: Sequence[str] = ("name", "verdict", "reason")) -> str:
    head = "".join(f'<th class="{"text" if k in text_fields else "num"}">{escape(h)}</th>'
                   for k, h in columns)
    body = []
    for row in rows:
        cls = f' class="{escape(str(row[row_class]))}"' if row_class and row_class in row else ""
        cells = []
        for k, _ in columns:
            kind = "text" if k in text_fields else "num"
            extra = " verdict" if k == "verdict" else ""
            cells.append(f'<td class="{kind}{extra}" data-field="{escape(k)}">{escape(fmt(row.get(k)))}</td>')
        body.append(f'<tr data-key="{escape(str(row[key_field]))}"{cls}>{"".join(cells)}</tr>')
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(body)}</tbody></table>"


def figure(svg: str, key: str, plot: str, caption: str) -> str:
    return (f'<figure data-key="{escape(key)}" data-plot="{escape(plot)}">{svg}'
            f"<figcaption>{escape(caption)}</figcaption></figure>")


def page(title: str, subtitle: str, body: Sequence[str]) -> str:
    return ("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
            f"<title>{escape(title)}</title><style>{STYLE}</style></head><body>"
            f"<h1>{escape(title)}</h1><p class=\"sub\">{escape(subtitle)}</p>{''.join(body)}"
            f"<p class=\"caution\">{escape(CAUTION)}</p></body></html>\n")


def write_page(path: str, text: str) -> None:
    """Write atomically: a report is either the old one or the whole new one."""
    from processing.atomic import atomic_write_bytes
    from protocol.errors import UserError

    try:
        atomic_write_bytes(path, text.encode("utf-8"), keep_backup=False)
    except OSError as exc:
        raise UserError(f"cannot write the report {path}: {exc.strerror or exc}") from None
