"""One self-contained HTML page: text, tables and PNG plots embedded as data URLs."""

from __future__ import annotations

import base64
import html
import math

__all__ = ["Page"]

_STYLE = """
body{font-family:system-ui,-apple-system,'Segoe UI',sans-serif;max-width:1100px;margin:1.5em auto;
 padding:0 1em;color:#1d2433;line-height:1.45}
h1{font-size:1.5em;margin-bottom:.2em}h2{font-size:1.15em;border-bottom:1px solid #cfd6e2;
 padding-bottom:.2em;margin-top:1.6em}
.sub{color:#5a6478;margin-top:0}
table{border-collapse:collapse;font-size:.9em;margin:.5em 0}
td,th{border:1px solid #d8dde7;padding:.25em .6em;text-align:right}
th{background:#eef1f6}td:first-child,th:first-child{text-align:left}
.flags li{margin:.2em 0}.flag{color:#8a2c0d}.ok{color:#24613a}
.figs{display:flex;flex-wrap:wrap;gap:1em}.figs figure{margin:0;flex:1 1 480px}
.figs img{max-width:100%;border:1px solid #e3e7ee}
figcaption{font-size:.85em;color:#5a6478}
.note{font-size:.85em;color:#5a6478}
code{background:#f3f5f9;padding:0 .25em}
"""


def _fmt(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        if math.isnan(value):
            return "–"
        if value != 0 and (abs(value) < 1e-3 or abs(value) >= 1e5):
            return f"{value:.4g}"
        return f"{value:.5g}"
    return str(value)


class Page:
    """Builder of the report page."""

    def __init__(self, title: str, subtitle: str = ""):
        self.title = title
        self.subtitle = subtitle
        self.parts: list[str] = []

    def heading(self, text: str) -> None:
        self.parts.append(f"<h2>{html.escape(text)}</h2>")

    def paragraph(self, text: str, css: str = "") -> None:
        cls = f' class="{css}"' if css else ""
        self.parts.append(f"<p{cls}>{html.escape(text)}</p>")

    def items(self, entries, *, css: str = "") -> None:
        lis = "".join(f'<li class="{css}">{html.escape(e)}</li>' for e in entries)
        self.parts.append(f'<ul class="flags">{lis}</ul>')

    def key_values(self, pairs) -> None:
        rows = "".join(f"<tr><td>{html.escape(str(k))}</td><td>{html.escape(_fmt(v))}</td></tr>"
                       for k, v in pairs)
        self.parts.append(f"<table>{rows}</table>")

    def table(self, frame, *, max_rows: int = 40) -> None:
        if frame is None or len(frame) == 0:
            self.paragraph("(none)", "note")
            return
        shown = frame.head(max_rows)
        head = "".join(f"<th>{html.escape(str(c))}</th>" for c in shown.columns)
        body = "".join("<tr>" + "".join(f"<td>{html.escape(_fmt(v))}</td>" for v in row) + "</tr>"
                       for row in shown.itertuples(index=False))
        self.parts.append(f"<table><tr>{head}</tr>{body}</table>")
        if len(frame) > max_rows:
            self.paragraph(f"first {max_rows} of {len(frame)} rows; all rows are in the CSV file", "note")

    def figures(self, figures) -> None:
        """``figures``: sequence of (caption, png_bytes)."""
        out = []
        for caption, png in figures:
            data = base64.b64encode(png).decode("ascii")
            out.append(f'<figure><img alt="{html.escape(caption)}" src="data:image/png;base64,{data}">'
                       f"<figcaption>{html.escape(caption)}</figcaption></figure>")
        if out:
            self.parts.append('<div class="figs">' + "".join(out) + "</div>")

    def render(self) -> str:
        sub = f'<p class="sub">{html.escape(self.subtitle)}</p>' if self.subtitle else ""
        return ("<!DOCTYPE html><html lang=\"en\"><head><meta charset=\"utf-8\">"
                f"<title>{html.escape(self.title)}</title><style>{_STYLE}</style></head><body>"
                f"<h1>{html.escape(self.title)}</h1>{sub}" + "\n".join(self.parts) + "</body></html>\n")
