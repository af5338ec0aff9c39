"""Text from files, made safe to show: ids and names never become markup.

Plotly reads hover text, labels and titles as a small subset of HTML, and
report pages are HTML, so every id or name that came from a file goes
through :func:`plain` before it is put into either.  Plotly turns the
entities back into the characters, as text.  Quotes become numeric
entities (``&#34;``, ``&#39;``): plotly decodes those but not ``&quot;``.

Examples
--------
>>> plain('<img src=x onerror="alert(1)">')
'&lt;img src=x onerror=&#34;alert(1)&#34;&gt;'
"""

from __future__ import annotations

import html


def plain(text: object) -> str:
    """``text`` with ``& < > " '`` escaped, to be shown literally in HTML or plotly text."""
    return html.escape(str(text), quote=False).replace('"', "&#34;").replace("'", "&#39;")
