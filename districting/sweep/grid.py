"""The settings a sweep varies, their combinations, and the names and words for each.

A sweep varies the stability weight, the utilization band's limit and floor, and the
site statuses (scenarios such as "the new school opens" or "it stays shut"); every
combination is one run of one level. A scenario is written ``"NAME: SITE=status,
SITE2=status"`` with the statuses of :data:`districting.rules.SITE_STATUSES`; the empty
scenario keeps the project's statuses.
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from dataclasses import dataclass

from ..intake import Inputs
from ..names import BadName, check_name
from ..rules import SITE_STATUSES
from ..study import RunSettings, level_sites, resolved

__all__ = ["Scenario", "Setting", "parse_scenario", "settings_grid", "option_name",
           "setting_words", "run_settings", "check_scenarios"]


@dataclass(frozen=True)
class Scenario:
    """Site statuses that differ from the project's, under a name people read."""

    name: str = ""
    statuses: tuple[tuple[str, str], ...] = ()

    def status_dict(self) -> dict[str, str]:
        return dict(self.statuses)


@dataclass(frozen=True)
class Setting:
    """One combination: a run of the level with these values (resolved: no None)."""

    stability_weight: float
    max_util: float
    min_util: float
    scenario: Scenario = Scenario()


def parse_scenario(text: str) -> Scenario:
    """``"E15 opens: E15=new, E03=closed"`` -> a :class:`Scenario` (ValueError in words)."""
    name, sep, body = str(text).partition(":")
    example = 'write it as "NAME: SITE=status,SITE2=status", e.g. "E15 opens: E15=new"'
    if not sep:
        raise ValueError(f"--scenario {text!r} has no name before a colon; {example}")
    try:
        name = check_name(name, what="scenario")
    except BadName as err:
        raise ValueError(f"--scenario {text!r}: {err}") from None
    pairs: dict[str, str] = {}
    for part in filter(None, (p.strip() for p in body.split(","))):
        site, eq, status = (s.strip() for s in part.partition("="))
        if not eq or not site:
            raise ValueError(f"--scenario {text!r}: {part!r} is not SITE=status; {example}")
        if status not in SITE_STATUSES:
            raise ValueError(f"--scenario {text!r}: status {status!r} of site {site} is not "
                             f"one of {', '.join(SITE_STATUSES)}")
        if site in pairs:
            raise ValueError(f"--scenario {text!r} names site {site} twice; keep one status")
        pairs[site] = status
    return Scenario(name, tuple(sorted(pairs.items())))


def check_scenarios(inputs: Inputs, level: str, scenarios: Sequence[Scenario]) -> None:
    """Refuse a scenario naming a site that is not a site of ``level`` (ValueError)."""
    sites = inputs.sites["site_id"].astype(str).to_numpy()[level_sites(inputs, level)].tolist()
    names = [sc.name for sc in scenarios]
    for sc in scenarios:
        if names.count(sc.name) > 1:
            raise ValueError(f"two scenarios are named {sc.name!r}; give each its own name")
        unknown = [s for s, _ in sc.statuses if s not in sites]
        if unknown:
            raise ValueError(f"scenario {sc.name!r}: {', '.join(unknown)} "
                             f"{'is' if len(unknown) == 1 else 'are'} not among the {level} "
                             f"sites ({', '.join(sites)}); use their site ids")


def settings_grid(inputs: Inputs, level: str, *, stability_weights: Sequence[float] = (),
                  max_utils: Sequence[float] = (), min_utils: Sequence[float] = (),
                  scenarios: Sequence[Scenario] = ()) -> list[Setting]:
    """Every combination of the lists, in a fixed order (an empty list: the project's
    value); repeated values are kept once. Combinations whose floor is above the limit are
    left out (ValueError when none is left)."""
    base = resolved(inputs, RunSettings(level=level))

    def values(given, default) -> list[float]:
        return list(dict.fromkeys(float(v) for v in given or ())) or [float(default)]

    scenarios = list(dict.fromkeys(scenarios)) or [Scenario()]
    check_scenarios(inputs, level, scenarios)
    grid = [Setting(w, hi, lo, sc) for sc, w, hi, lo in itertools.product(
        scenarios, values(stability_weights, base.stability_weight),
        values(max_utils, base.max_utilization), values(min_utils, base.min_utilization))
        if lo <= hi]
    if not grid:
        raise ValueError("every --min-util is above every --max-util; the floor of the band "
                         "must be at most its limit")
    return grid


def _pct(share: float) -> str:
    return f"{100 * share:.4g}"


def setting_words(setting: Setting) -> str:
    """The combination in plain words: '3000 m per student moved, band 60-95%, E15 opens'."""
    weight = (f"{setting.stability_weight:g} m per student moved" if setting.stability_weight
              else "no charge for moves")
    words = f"{weight}, band {_pct(setting.min_util)}–{_pct(setting.max_util)}%"
    return f"{words}, {setting.scenario.name}" if setting.scenario.name else words


def option_name(prefix: str, setting: Setting) -> str:
    """The saved option's name: the prefix and every value ('Sweep – moves 3000 – band
    60–95 – E15 opens'; no commas, so ``packet --options`` can list it); checked by
    :func:`districting.names.check_name` (ValueError)."""
    name = (f"{prefix} – moves {setting.stability_weight:g} – band "
            f"{_pct(setting.min_util)}–{_pct(setting.max_util)}")
    if setting.scenario.name:
        name += f" – {setting.scenario.name}"
    try:
        return check_name(name)
    except BadName as err:
        raise ValueError(f"the option name made from --save {prefix!r} and the settings "
                         f"breaks the name rule: {err}; choose a shorter prefix or "
                         "scenario names") from None


def run_settings(level: str, setting: Setting, **fixed) -> RunSettings:
    """The :class:`RunSettings` of one combination; ``fixed`` holds what every run shares
    (time_limit, gap, travel, plan_year...)."""
    return RunSettings(level=level, stability_weight=setting.stability_weight,
                       max_utilization=setting.max_util, min_utilization=setting.min_util,
                       status=setting.scenario.status_dict(), **fixed)
