"""Why there is no plan, told to people: one lead line, then one cause per line.

:mod:`.precheck` and :mod:`.diagnose` find the causes as :class:`Finding` records (the rule,
the school or unit, the year, what goes wrong by how much, the fix to consider);
:func:`no_plan_text` turns them into the message every reader gets (the command line, the
workbench, a saved option): a short lead line such as "No elementary plan meets every rule:
3 schools cannot stay inside their band in 2029." and then the causes as a list.

Student counts are whole: :func:`students` rounds in the students' favour (what a fix must
provide is rounded up, what schools can offer is rounded down) and says "about" when it
rounded.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

__all__ = ["Finding", "no_plan_text", "lead_line", "students", "plural", "RULES",
           "stopped_short_text"]


@dataclass(frozen=True)
class Finding:
    """One cause: ``text`` names the school or unit, the year and the amount; ``fix`` the
    change to consider. ``rule`` is a key of :data:`RULES` (it groups the lead line);
    ``lead`` replaces the rule's words in the lead line when given."""

    rule: str
    text: str
    fix: str
    school: str = ""
    unit: str = ""
    year: str = ""
    lead: str = ""

    def __str__(self) -> str:
        return f"{self.text} To fix: {self.fix}"


def students(value: float, up: bool = True) -> str:
    """A whole number of students (or seats) for people.

    ``up``: a number a fix must provide (students to seat, students over a limit, a floor
    to reach) is rounded up; otherwise (seats a school offers) down. "about" says the
    figure was rounded.
    """
    whole = math.ceil(value - 1e-9) if up else math.floor(value + 1e-9)
    return f"{'about ' if abs(whole - value) > 1e-6 else ''}{whole:,}"


def plural(value: float, word: str) -> str:
    """``word`` with an s unless ``value`` is one."""
    return word if abs(value - 1) < 1e-9 else word + "s"


def _counted(n: int, word: str) -> str:
    return f"{n} {plural(n, word)}"


def _years(findings: Sequence[Finding]) -> str:
    years = sorted({f.year for f in findings if f.year})
    if not years:
        return ""
    if len(years) > 2 and all(y.isdigit() for y in years) and (
            int(years[-1]) - int(years[0]) == len(years) - 1):
        return f" in every year from {years[0]} to {years[-1]}"
    shown = years[0] if len(years) == 1 else ", ".join(years[:-1]) + " and " + years[-1]
    return f" in {shown}"


def _schools(fs: Sequence[Finding]) -> int:
    return len({f.school for f in fs}) or len(fs)


def _units(fs: Sequence[Finding]) -> int:
    return len({f.unit for f in fs}) or len(fs)


#: rule -> the lead line's words for its findings.
RULES = {
    "seats": lambda fs: f"there are more students than seats{_years(fs)}",
    "band": lambda fs: (f"{_counted(_schools(fs), 'school')} cannot stay inside "
                        f"{'its' if _schools(fs) == 1 else 'their'} band{_years(fs)}"),
    "lock": lambda fs: (f"{_counted(_units(fs), 'locked unit')} cannot stay with "
                        f"{'its' if _units(fs) == 1 else 'their'} school"),
    "moves": lambda fs: "the limit on students moved is too low",
    "transport": lambda fs: "the limit on students needing transport is too low",
    "walkers": lambda fs: (f"{_counted(_schools(fs), 'school')} cannot seat the students "
                           "who must walk to them"),
    "groups": lambda fs: (f"{_counted(_schools(fs), 'school')} cannot stay inside the group "
                          f"band{_years(fs)}"),
    "contiguity": lambda fs: "the zones cannot all be connected",
    "no_school": lambda fs: f"{_counted(_units(fs), 'unit')} cannot go to any school",
    "island": lambda fs: f"{_counted(_units(fs), 'unit')} cannot be joined to any zone",
    "open_count": lambda fs: "the number of open schools cannot be met",
    "shared_unit": lambda fs: f"{_counted(len(fs), 'pair')} of open schools share a unit",
    "own_unit": lambda fs: (f"{_counted(_schools(fs), 'school')} may not take "
                            f"{'its' if _schools(fs) == 1 else 'their'} own unit"),
    "pairs": lambda fs: "some units have no school they are allowed to join",
    "undecided": lambda fs: "the reason could not be found in the time given",
    "solve": lambda fs: "the solve stopped short of a plan, though one exists",
    "together": lambda fs: "some rules cannot hold together",
    "feeder": lambda fs: (f"{_counted(len(fs), 'lower zone')} cannot go whole to one "
                          "school"),
    "nested": lambda fs: "the zones cannot all stay inside the zones of the level above",
}


def lead_line(findings: Sequence[Finding], level: str = "") -> str:
    """The first line: which plan is missing and the main causes, in a sentence."""
    groups: dict[str, list[Finding]] = {}
    for f in findings:
        groups.setdefault(f.rule, []).append(f)
    words = [fs[0].lead or RULES[rule](fs) for rule, fs in groups.items()]
    what = f"No {level} plan" if level else "No plan"
    if not words:
        return f"{what} meets every rule."
    if len(words) > 2:
        rest = len(words) - 1
        words = [words[0], f"{rest} other {plural(rest, 'cause')} (below)"]
    return f"{what} meets every rule: {'; '.join(words)}."


def no_plan_text(findings: Sequence[Finding], level: str = "") -> str:
    """The message for a problem without a plan: the lead line, then one cause per line."""
    return "\n".join([lead_line(findings, level), *(f"- {f}" for f in findings)])


def stopped_short_text(level: str, seconds: float, rounds: int, pieces: int, locked: int = 0,
                       cancelled: bool = False) -> str:
    """The message for a solve that ended without a plan but without a proof that none exists.

    Says what was tried (the quick checks, the rounds, what the last answer lacked) and what
    to relax: more time first, then the locks (``locked`` units are locked), then the band and
    the move limit. With zones left in pieces connected zones are what is hard, so the locks
    and forbids between zones are named.
    """
    what = f"No {level} plan" if level else "No plan"
    took = f"{seconds:.0f} s" if seconds >= 10 else f"{seconds:.1f} s"
    why = "the solve was stopped" if cancelled else f"none was found in {took}"
    tried = ["the quick checks of every rule found nothing that cannot be met"]
    if rounds:
        tried.append(f"{rounds} {plural(rounds, 'round')} of the exact model ran, with the "
                     "start from today's zones and the search from nearest schools")
    if pieces:
        tried.append(f"the last answer left {pieces} {plural(pieces, 'piece')} of zones cut "
                     "off from their school, and no repair joined them")
    relax = ["allow more time"]
    if locked:
        relax.append(f"remove the newest of the {locked} {plural(locked, 'lock')}"
                     + (", first those between two zones" if pieces else ""))
    elif pieces:
        relax.append("remove forbids that sit between two zones")
    relax.append("widen the utilization band or raise the move limit")
    return "\n".join([f"{what} meets every rule yet: {why}, and no rule was shown to be "
                       "impossible.", f"- Tried: {'; '.join(tried)}.",
                       f"- To fix: {', or '.join(relax)}, then solve again."])
