"""Self-contained HTML pages of figures, readable offline.

A page is a title and sections (heading, paragraphs, an optional table,
figures).  plotly.js is embedded in the page by default, so the file opens
anywhere without a network; ``plotlyjs='beside'`` writes it once as
``plotly.min.js`` next to the page instead, for several pages in one folder.
Every text from files is escaped (:func:`viz.markup.plain`); plotly's own
JSON encoding escapes ``<``, ``>`` and ``/`` inside the figure data.  Each
figure, once drawn, counts itself in ``window.vesselnetDrawn`` and the page
notes ``window.vesselnetDone`` (milliseconds since navigation) when all are.

Examples
--------
>>> html = page_html("demo <report>", [Section("first", text=("a & b",))])
>>> "<title>demo &lt;report&gt;</title>" in html, "a &amp; b" in html
(True, True)
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import plotly.io as pio

from vesselnet.writers import atomic_write

from . import palette
from .markup import plain

PLOTLY_FILE = "plotly.min.js"
CONFIG = {"displaylogo": False, "responsive": True, "scrollZoom": True,
          "toImageButtonOptions": {"format": "svg", "filename": "vesselnet-view"},
          "modeBarButtonsToRemove": ["lasso2d", "select2d"]}
DRAWN = ("window.vesselnetDrawn = (window.vesselnetDrawn || 0) + 1;"
         "document.getElementById('{plot_id}').setAttribute('data-drawn', '1');"
         "if (window.vesselnetDrawn === window.vesselnetFigures) {"
         "window.vesselnetDone = performance.now(); }")


@dataclass(frozen=True)
class Section:
    """One part of a page.

    ``figures`` in ``columns`` columns (1 or 2: the first figure wider);
    ``table`` is ``(headers, rows)`` of plain values.  All text is escaped.
    """

    heading: str
    text: tuple[str, ...] = ()
    figures: tuple = ()
    table: tuple[Sequence[str], Sequence[Sequence[object]]] | None = None
    columns: int = 1
    note: str = ""
    figure_notes: tuple[str, ...] = field(default=())


def _table_html(headers, rows) -> str:
    head = "".join(f"<th>{plain(h)}</th>" for h in headers)
    body = "".join("<tr>" + "".join(f"<td>{_cell(v)}</td>" for v in row) + "</tr>" for row in rows)
    return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"


def _cell(value) -> str:
    if isinstance(value, float):
        return f"{value:.1f}" if abs(value) >= 0.05 or value == 0 else f"{value:.3g}"
    return plain(value)


STYLE = f"""
:root {{ color-scheme: light; }}
body {{ margin: 0; background: #f3f2ee; color: {palette.TEXT}; font-family: {palette.FONT};
       font-size: 15px; line-height: 1.45; }}
header, main, footer {{ max-width: 1480px; margin: 0 auto; padding: 0 20px; }}
header h1 {{ font-size: 24px; margin: 22px 0 4px; letter-spacing: 0.01em; }}
header p, footer p {{ margin: 4px 0 12px; color: #55595f; }}
section {{ background: #ffffff; border: 1px solid #e2e0d9; border-radius: 8px; margin: 18px 0;
          padding: 14px 18px 8px; }}
section h2 {{ font-size: 19px; margin: 2px 0 6px; }}
section p {{ margin: 4px 0 8px; }}
.grid {{ display: grid; grid-template-columns: minmax(0, 3fr) minmax(0, 2fr); gap: 14px;
        align-items: start; }}
.figure {{ min-width: 0; }}
.fignote {{ font-size: 13px; color: #55595f; margin: 0 0 10px 6px; }}
@media (max-width: 1000px) {{ .grid {{ grid-template-columns: minmax(0, 1fr); }} }}
table {{ border-collapse: collapse; font-size: 13px; margin: 6px 0 12px;
        font-variant-numeric: tabular-nums; }}
th, td {{ padding: 3px 10px; border-bottom: 1px solid #ebe9e3; text-align: right; }}
th:first-child, td:first-child {{ text-align: left; }}
th {{ font-weight: 600; border-bottom: 1px solid #c9c6bf; }}
details summary {{ cursor: pointer; color: #3b4f9a; margin: 4px 0; }}
"""


def page_html(title: str, sections: Sequence[Section], *, intro: Sequence[str] = (),
              footer: Sequence[str] = (), plotlyjs: str = "embed") -> str:
    """The whole page as text.

    Parameters
    ----------
    title : str
        Page title and top heading (escaped).
    sections : sequence of Section
    intro, footer : sequence of str
        Paragraphs above and below the sections (escaped).
    plotlyjs : {'embed', 'beside'}
        Embed plotly.js, or refer to ``plotly.min.js`` beside the page.
    """
    if plotlyjs not in ("embed", "beside"):
        raise ValueError(f"plotlyjs must be 'embed' or 'beside', got {plotlyjs!r}")
    figures = [f for s in sections for f in s.figures]
    if not figures:
        script = ""
    elif plotlyjs == "embed":
        from plotly.offline import get_plotlyjs

        script = f'<script type="text/javascript">{get_plotlyjs()}</script>'
    else:
        script = f'<script type="text/javascript" src="{PLOTLY_FILE}"></script>'
    parts = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
             '<meta name="viewport" content="width=device-width, initial-scale=1">',
             f"<title>{plain(title)}</title><style>{STYLE}</style>",
             f"<script>window.vesselnetFigures = {len(figures)};</script>", script, "</head><body>",
             f"<header><h1>{plain(title)}</h1>"]
    parts += [f"<p>{plain(p)}</p>" for p in intro]
    parts.append("</header><main>")
    count = 0
    for s in sections:
        parts.append(f"<section><h2>{plain(s.heading)}</h2>")
        parts += [f"<p>{plain(p)}</p>" for p in s.text]
        if s.figures:
            parts.append('<div class="grid">' if s.columns == 2 else "<div>")
            for k, fig in enumerate(s.figures):
                count += 1
                height = fig.layout.height or 500
                div = pio.to_html(fig, full_html=False, include_plotlyjs=False, div_id=f"vn-fig-{count}",
                                  config=CONFIG, post_script=DRAWN, default_width="100%",
                                  default_height=f"{height}px", validate=False)
                note = s.figure_notes[k] if k < len(s.figure_notes) else ""
                note_html = f'<p class="fignote">{plain(note)}</p>' if note else ""
                parts.append(f'<div class="figure">{div}{note_html}</div>')
            parts.append("</div>")
        if s.table is not None:
            headers, rows = s.table
            parts.append(f"<details><summary>table</summary>{_table_html(headers, rows)}</details>")
        if s.note:
            parts.append(f'<p class="fignote">{plain(s.note)}</p>')
        parts.append("</section>")
    parts.append("</main><footer>")
    parts += [f"<p>{plain(p)}</p>" for p in footer]
    parts.append("</footer></body></html>")
    return "\n".join(parts)


def write_page(path, title: str, sections: Sequence[Section], *, intro: Sequence[str] = (),
               footer: Sequence[str] = (), plotlyjs: str = "embed") -> list[Path]:
    """Write the page (and ``plotly.min.js`` beside it when asked); returns the paths written.

    The folder is created when missing; files are replaced atomically.
    """
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    written = []
    if plotlyjs == "beside":
        from plotly.offline import get_plotlyjs

        js = path.parent / PLOTLY_FILE
        source = get_plotlyjs()
        if not js.is_file() or js.stat().st_size != len(source.encode("utf-8")):
            atomic_write(js, source)
            written.append(js)
    atomic_write(path, page_html(title, sections, intro=intro, footer=footer, plotlyjs=plotlyjs))
    return [path] + written


def write_image(fig, path, *, width: int = 1200, height: int | None = None, scale: float = 2.0) -> Path:
    """Static image of a figure (PNG, SVG or PDF by the suffix) through plotly's kaleido export.

    kaleido drives the system's Chromium; the switching buttons are left
    out.  ``width``/``height`` are in CSS pixels, ``scale`` multiplies them
    for raster formats.

    Raises
    ------
    ImportError
        kaleido is not installed (``pip install 'vesselnet[images]'``).
    """
    try:
        import kaleido  # noqa: F401
    except ImportError as exc:
        raise ImportError("static images need kaleido: pip install 'vesselnet[images]'") from exc
    import plotly.graph_objects as go

    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    still = go.Figure(fig)
    still.update_layout(updatemenus=[])  # buttons do nothing on paper
    still.write_image(str(path), width=width, height=height or fig.layout.height or 700, scale=scale)
    return path
