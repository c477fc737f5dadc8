"""Safety-margin checks against user-set temperature limits, shared by every family.

Solvers describe where their extremes are (`Scope` records); `check_limits` compares them with
the caller's `Limits` and the materials' own service limits. Temperatures in degC, margins in K.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

OK, WARNING, EXCEEDED, NOT_CHECKED = "ok", "warning", "exceeded", "not_checked"
_RANK = {NOT_CHECKED: 0, OK: 1, WARNING: 2, EXCEEDED: 3}


@dataclass(frozen=True)
class Limits:
    """Caller's limits, degC; `warning_margin` in K (a margin smaller than it warns)."""

    max_temperature: float | None = None
    min_temperature: float | None = None
    max_surface_temperature: float | None = None
    warning_margin: float = 10.0

    @property
    def any(self) -> bool:
        return any(v is not None for v in (self.max_temperature, self.min_temperature,
                                           self.max_surface_temperature))


@dataclass(frozen=True)
class Location:
    """An extreme temperature and where (and when) it occurs.

    `position` is in metres in the family's own frame (plate: (x, y) from bottom-left;
    layers: radius or depth; transient: distance from centre). `time` in s for transients.
    """

    temperature: float
    description: str
    position: tuple[float, ...] = ()
    time: float | None = None


@dataclass(frozen=True)
class Scope:
    """A region whose extremes are known: the whole body, one exposed surface, one layer/zone.

    `history` (transients only) holds (time, hottest, coldest) per output time, in time order,
    so the first crossing of a limit can be reported.
    """

    name: str
    hottest: Location
    coldest: Location
    history: tuple[tuple[float, float, float], ...] = field(default=())


@dataclass(frozen=True)
class SafetyCheck:
    """One limit compared with the extreme found for it."""

    limit: str            # which limit: "max_temperature", "layers.1.max_temperature", ...
    limit_value: float    # degC
    extreme: float        # degC, the hottest (for max limits) or coldest (min limits) found
    margin: float         # K, positive = inside the limit
    status: str           # ok / warning / exceeded
    where: Location
    first_crossed_time: float | None = None  # s, transients: first output time beyond the limit


@dataclass(frozen=True)
class SafetyReport:
    status: str
    checks: tuple[SafetyCheck, ...] = ()


NOT_CHECKED_REPORT = SafetyReport(status=NOT_CHECKED, checks=())


def _status(margin: float, warning_margin: float) -> str:
    if margin < 0.0:
        return EXCEEDED
    if margin < warning_margin:
        return WARNING
    return OK


def _first_crossing(history: Sequence[tuple[float, float, float]], limit: float,
                    upper: bool) -> float | None:
    for time, hottest, coldest in history:
        if (upper and hottest > limit) or (not upper and coldest < limit):
            return time
    return None


def _check_upper(name: str, limit: float, scopes: Sequence[Scope], margin: float) -> SafetyCheck:
    scope = max(scopes, key=lambda s: s.hottest.temperature)
    extreme = scope.hottest.temperature
    crossed = [t for s in scopes if (t := _first_crossing(s.history, limit, True)) is not None]
    return SafetyCheck(limit=name, limit_value=limit, extreme=extreme, margin=limit - extreme,
                       status=_status(limit - extreme, margin), where=scope.hottest,
                       first_crossed_time=min(crossed) if crossed else None)


def _check_lower(name: str, limit: float, scopes: Sequence[Scope], margin: float) -> SafetyCheck:
    scope = min(scopes, key=lambda s: s.coldest.temperature)
    extreme = scope.coldest.temperature
    crossed = [t for s in scopes if (t := _first_crossing(s.history, limit, False)) is not None]
    return SafetyCheck(limit=name, limit_value=limit, extreme=extreme, margin=extreme - limit,
                       status=_status(extreme - limit, margin), where=scope.coldest,
                       first_crossed_time=min(crossed) if crossed else None)


def check_limits(
    limits: Limits,
    body: Scope,
    surfaces: Sequence[Scope] = (),
    materials: Sequence[tuple[str, float, Scope]] = (),
) -> SafetyReport:
    """Compare extremes with limits.

    Parameters
    ----------
    limits : Limits
        The caller's limits.
    body : Scope
        Extremes over the whole body (checked against max/min_temperature).
    surfaces : sequence of Scope
        Exposed surfaces (checked against max_surface_temperature). If empty while a surface
        limit is set, the body's extremes are used.
    materials : sequence of (limit name, limit value degC, Scope)
        Material service limits, e.g. ("layers.1.max_temperature", 650.0, scope_of_layer_1).

    Returns
    -------
    SafetyReport
        ``status`` is the worst of the checks (exceeded > warning > ok), ``not_checked`` when
        no limit applies; one `SafetyCheck` per limit.
    """
    m = limits.warning_margin
    checks: list[SafetyCheck] = []
    if limits.max_temperature is not None:
        checks.append(_check_upper("max_temperature", limits.max_temperature, [body], m))
    if limits.min_temperature is not None:
        checks.append(_check_lower("min_temperature", limits.min_temperature, [body], m))
    if limits.max_surface_temperature is not None:
        checks.append(_check_upper("max_surface_temperature", limits.max_surface_temperature,
                                   list(surfaces) or [body], m))
    for name, value, scope in materials:
        checks.append(_check_upper(name, value, [scope], m))
    if not checks:
        return NOT_CHECKED_REPORT
    status = max((c.status for c in checks), key=_RANK.__getitem__)
    return SafetyReport(status=status, checks=tuple(checks))
