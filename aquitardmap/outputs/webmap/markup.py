"""Escaping of user text for the page, and markup that folium must not re-template."""

from __future__ import annotations

import html
import json
from typing import Any

from branca.element import Element


def esc(value: Any) -> str:
    """HTML-escape user text; braces become character references.

    folium hands rendered layer code back to Jinja as a template, so ``{{ 7*7 }}`` in a
    borehole id would otherwise be evaluated; ``&#123;`` displays as ``{`` and is inert.
    """
    text = html.escape("" if value is None else str(value), quote=True)
    return text.replace("{", "&#123;").replace("}", "&#125;")


def js_json(value: Any) -> str:
    """JSON for a ``<script>`` block: ``<``, ``>`` and ``&`` spelled as ``\\u003c`` etc., so
    no string can close the script or open a comment."""
    text = json.dumps(value, ensure_ascii=False, allow_nan=False, separators=(",", ":"))
    return (text.replace("<", "\\u003c").replace(">", "\\u003e").replace("&", "\\u0026")
            .replace("\u2028", "\\u2028").replace("\u2029", "\\u2029"))


class RawHtml(Element):
    """Markup placed in the page as-is (never parsed as a template)."""

    def __init__(self, markup: str) -> None:
        super().__init__()
        self._markup = markup

    def render(self, **kwargs: Any) -> str:
        return self._markup
