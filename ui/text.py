"""Text from people and data files, made safe to place in the page's HTML.

:func:`status_text` is the one place the workbench puts a plan's status into words.

Names of options, schools, units and the project are shown as typed, never as markup:
:func:`esc` escapes them for HTML, and :func:`text_block` wraps a message in one HTML block
so that the Markdown panes (``pn.pane.Alert``) do not read ``*``, ``_`` or ``[..](..)`` in
it as formatting either (CommonMark leaves the inside of an HTML block alone).
"""

from __future__ import annotations

import html

__all__ = ["esc", "text_block", "status_text", "share_text"]


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
    ``message``): a Plan, or a saved option's listing. Solver words never reach the page.
    """
    status = str(getattr(plan, "status", ""))
    gap = float(getattr(plan, "gap", float("nan")))
    known = gap == gap and gap != float("inf")
    close = f"within {share_text(gap)} of the best possible" if known else ""
    if status == "optimal":
        return "best possible plan" if known and gap <= 1e-6 else close or "best possible plan"
    if status == "feasible":
        return f"a valid plan, {close}" if known else "a valid plan (not compared with the best)"
    if status in ("time_limit", "cancelled"):
        why = "stopped at the time limit" if status == "time_limit" else "cancelled"
        return f"{why}: {close}" if known else f"{why}: how close to the best is not known"
    reason = str(getattr(plan, "message", "") or "").strip()
    return f"no plan: {reason}" if reason else "no plan"
