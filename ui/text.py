"""Text from people and data files, made safe to place in the page's HTML.

Names of options, schools, units and the project are shown as typed, never as markup:
:func:`esc` escapes them for HTML, and :func:`text_block` wraps a message in one HTML block
so that the Markdown panes (``pn.pane.Alert``) do not read ``*``, ``_`` or ``[..](..)`` in
it as formatting either (CommonMark leaves the inside of an HTML block alone).
"""

from __future__ import annotations

import html

__all__ = ["esc", "text_block"]


def esc(text: object) -> str:
    """``text`` with ``& < > " '`` escaped: safe inside HTML text and quoted attributes."""
    return html.escape(str(text), quote=True)


def text_block(text: object) -> str:
    """A message as one HTML block: escaped, line breaks kept as ``<br>``."""
    body = esc(text).replace("\r\n", "\n").replace("\n", "<br>")
    return f"<div class='plain-text'>{body}</div>"
