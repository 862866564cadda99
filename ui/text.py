"""Text from people and data files, made safe to place in the page's HTML.

:func:`status_text` is the one place the workbench puts a plan's status into words.

Names of options, schools, units and the project are shown as typed, never as markup:
:func:`esc` escapes them for HTML, and :func:`text_block` wraps a message in one HTML block
so that the Markdown panes (``pn.pane.Alert``) do not read ``*``, ``_`` or ``[..](..)`` in
it as formatting either (CommonMark leaves the inside of an HTML block alone).
"""

from __future__ import annotations

import html
from datetime import datetime

import numpy as np

from districting.outputs.wording import status_words_of

__all__ = ["esc", "text_block", "status_text", "share_text", "when_text", "restored_text"]


def esc(text: object) -> str:
    """``text`` with ``& < > " '`` escaped: safe inside HTML text and quoted attributes."""
    return html.escape(str(text), quote=True)


def text_block(text: object) -> str:
    """A message as one HTML block: escaped, line breaks kept as ``<br>``."""
    body = esc(text).replace("\r\n", "\n").replace("\n", "<br>")
    return f"<div class='plain-text'>{body}</div>"


def share_text(share: float) -> str:
    """A share as a percentage: two decimals below 0.1%, one above (0.0004 -> '0.04%')."""
    return f"{share:.2%}" if share < 0.001 else f"{share:.1%}"


def status_text(plan) -> str:
    """A plan's status in words for people: anything with ``status``, ``gap`` (and
    ``message``, ``bound``, ``feasible`` when it has them): a Plan, or a saved option's
    listing. The words are :func:`districting.outputs.wording.status_words_of`'s, the same
    as in the exports and the packet; solver words never reach the page.
    """
    bound = getattr(plan, "bound", None)
    return status_words_of(
        getattr(plan, "status", ""), getattr(plan, "gap", float("nan")),
        str(getattr(plan, "message", "") or ""),
        bound_known=None if bound is None else bool(np.isfinite(float(bound))),
        feasible=getattr(plan, "feasible", None))


def when_text(iso: str) -> str:
    """An ISO 8601 time as the server's local clock reads it: '13:05 on 3 Dec 2026'."""
    try:
        t = datetime.fromisoformat(str(iso).replace("Z", "+00:00"))
    except ValueError:
        return ""
    if t.tzinfo is not None:
        t = t.astimezone()
    return f"{t:%H:%M} on {t.day} {t:%b %Y}"


def restored_text(outcome) -> str:
    """What a page opened on the last result says about it."""
    name = f"option {outcome.name!r}" if outcome.name else "the last result"
    when = when_text(outcome.created)
    solved = f", solved at {when}" if when else ""
    return (f"Showing {name} for the {outcome.level} level{solved} "
            f"({status_text(outcome.plan)}). Your locks and edits are as you left them; "
            "press Rerun to solve again.")
