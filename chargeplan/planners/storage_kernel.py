"""The storage season as arrays: each battery's charge day by day, and what staff do when.

Pure numpy over the batteries; no files, no text, no engine. The season is walked from one
decision day to the next: a round day (every battery present is visited), an arrival (that
battery's intake) or a reading (the battery's state is reset from it, and it is treated as
an intake on that date, so what follows is what a fresh run would plan for a battery that
arrives that day in that state). At each visit the kernel looks ahead to the next round:

- a battery that would fall below its threshold, or (lead-acid) whose predicted charge
  reaches its freezing range (its electrolyte's freezing point, US Army TM 5-1185 Table III
  with the BCI gravity table, within ``FREEZE_MARGIN_K`` of the bay's minimum), is charged;
- if even then it would reach its freezing range before the next round, its load is
  disconnected; failing that it is moved to the warm room; failing that it must be topped
  up again by the day before (the date is kept), where that day can charge it; else there
  is no remedy on site;
- lithium whose load would drain it below its threshold before the next round has the load
  disconnected where it may come off (BU-702: lithium is stored with its loads off);
- lithium is charged only at 0 degC and above (BU-410 Table 1), in its own bay or the warm
  room; otherwise the charge waits and is due again at the next visit.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from enum import IntEnum

import numpy as np

from chargeplan.physics.electrolyte import freezing_point_tm5_1185, specific_gravity_bci
from chargeplan.physics.self_discharge import self_discharge_rate

__all__ = [
    "FREEZE_MARGIN_K",
    "Act",
    "Kind",
    "Remedy",
    "Season",
    "Visits",
    "freezing_charge",
    "freezing_point_at",
    "run_season",
]

#: A lead-acid battery is at risk when a day's minimum is within this of its electrolyte's
#: freezing point (common practice: keep a margin).
FREEZE_MARGIN_K = 3.0
#: Within this of its target a battery counts as charged (percentage points).
FULL_WITHIN_PCT = 0.5


class Kind(IntEnum):
    INTAKE = 0
    ROUND = 1
    READING = 2  # an intake from a reading
    RELEASE = 3


class Act(IntEnum):
    CHECK = 0  # measure the rested voltage
    MAINTAINER = 1  # check the maintainer
    TOP_UP = 2  # lead-acid charged full
    TO_STORAGE = 3  # lithium (sloped curve) charged to its storage level
    DISCHARGE = 4  # lithium discharged to its storage level
    COUNT_DOWN = 5  # LiFePO4: charge full, then take out the stated Ah
    WAIT = 6  # a charge is due but no bay with mains is inside its window today
    STORE = 7  # intake: store as it is
    REFUSED = 8  # do not store it as it is (the core rules refuse its reading)
    RELEASE = 9


#: The acts that put a battery on a charger.
CHARGES = (Act.TOP_UP, Act.TO_STORAGE, Act.COUNT_DOWN)


class Remedy(IntEnum):
    NONE = 0
    CHARGE_NOW = 1  # charged now because the cold is coming
    DISCONNECT = 2  # its load is disconnected
    MOVE = 3  # moved to the warm room
    SOONER = 4  # top it up again by remedy_day
    NOTHING = 5  # no remedy within the site: it stays at risk


def freezing_point_at(soc_pct: np.ndarray) -> np.ndarray:
    """Freezing point (degC) of lead-acid electrolyte at a state of charge (BCI; TM 5-1185)."""
    return freezing_point_tm5_1185(specific_gravity_bci(np.clip(soc_pct, 0.0, 100.0)))


@dataclass
class Season:
    """Everything the kernel needs, as arrays (n batteries, b bays, D days)."""

    lead: np.ndarray
    lfp: np.ndarray
    bay: np.ndarray  # int (n), the bay at intake
    kind_of: np.ndarray  # int (n): index into rate/ref/doubling (the battery's profile)
    rate: np.ndarray  # (k) %/day at the reference temperature
    reference_c: np.ndarray  # (k)
    doubling_k: np.ndarray  # (k)
    arrive: np.ndarray
    depart: np.ndarray
    intake_soc: np.ndarray  # NaN: unknown (LiFePO4 on its flat curve)
    target: np.ndarray
    threshold: np.ndarray
    draw_pct_day: np.ndarray
    connected: np.ndarray
    may_disconnect: np.ndarray
    charge_min_c: np.ndarray
    charge_max_c: np.ndarray
    on_maintainer: np.ndarray
    refused: np.ndarray
    bay_mean: np.ndarray  # (b, D)
    bay_min: np.ndarray  # (b, D)
    mains: np.ndarray  # (b)
    warm: int  # the warm room's bay, -1 for none
    round_days: list[int]
    readings: list[tuple[int, int, float]] = field(default_factory=list)  # (day, battery, soc)
    band: tuple[float, float] = (40.0, 50.0)  # lithium's storage band (BU-702)
    unknown_soc: float = 20.0  # what an unknown LiFePO4 charge is taken as while it waits

    @property
    def n(self) -> int:
        return len(self.lead)

    @property
    def days(self) -> int:
        return self.bay_mean.shape[1]


@dataclass
class Visits:
    """One entry per visit, as columns (all the same length), in order of day, then battery
    (run_season sorts them so; a battery visited twice on a day keeps its visits in order)."""

    day: np.ndarray
    battery: np.ndarray
    kind: np.ndarray
    act: np.ndarray
    where: np.ndarray  # the bay it is charged in (or stored in)
    bay: np.ndarray  # the bay it is stored in after the visit
    soc_before: np.ndarray
    soc_after: np.ndarray
    thaw: np.ndarray  # bool: check for ice and thaw first
    freeze: np.ndarray  # bool: its predicted charge reaches its freezing range this interval
    remedy: np.ndarray
    remedy_day: np.ndarray
    freeze_c: np.ndarray  # freezing point at the interval's lowest charge (NaN: lithium)
    low_c: np.ndarray  # the bay's lowest minimum over the interval
    margin_k: np.ndarray  # least (bay minimum - freezing point) over the interval
    end_day: np.ndarray  # the last day of the interval

    def __len__(self) -> int:
        return len(self.day)


@dataclass
class Result:
    visits: Visits
    soc_daily: np.ndarray  # (n, D), at the end of each day; NaN while absent
    bay_daily: np.ndarray  # (n, D), the bay it is in each day
    bay: np.ndarray  # the bay at the season's end
    connected: np.ndarray


_COLUMNS = tuple(Visits.__dataclass_fields__)
#: The visits' small columns kept small (a season holds millions of visits).
_DTYPES = {"day": np.int32, "battery": np.int32, "kind": np.int8, "act": np.int8,
           "where": np.int16, "bay": np.int16, "thaw": bool, "freeze": bool, "remedy": np.int8,
           "remedy_day": np.int32, "end_day": np.int32}


class _State:
    """The walk's mutable state, and the visits recorded so far."""

    def __init__(self, s: Season) -> None:
        self.s = s
        self.soc = np.zeros(s.n)
        self.bay = s.bay.copy()
        self.connected = s.connected.copy()
        self.pending = np.zeros(s.n, dtype=bool)
        self.done = s.refused.copy()  # no rounds for a refused battery
        self.extra: dict[int, list[int]] = {}  # day -> batteries to top up again that day
        self.parts: dict[str, list[np.ndarray]] = {c: [] for c in _COLUMNS}
        # daily loss (%/day) per profile kind and bay, and its running sum along the season
        sd = self_discharge_rate(s.rate[:, None, None], s.bay_mean[None, :, :],
                                 s.reference_c[:, None, None], s.doubling_k[:, None, None])
        self.sd = sd.reshape(-1, s.days)
        self.sd_by_day = np.ascontiguousarray(self.sd.T)
        self.cum = np.concatenate([np.zeros((self.sd.shape[0], 1)),
                                   np.cumsum(self.sd, axis=1)], axis=1)
        self.nbays = s.bay_mean.shape[0]
        self.safe_soc = _safe_soc(s.bay_min)

    def key(self, idx: np.ndarray) -> np.ndarray:
        return self.s.kind_of[idx] * self.nbays + self.bay[idx]

    def predicted(self, idx: np.ndarray, soc: np.ndarray, d: int, end: int) -> np.ndarray:
        """Charge at the end of each day d..end-1 from ``soc`` at the start of day d."""
        by_key = self.cum[:, d + 1:end + 1] - self.cum[:, d][:, None]  # a few kinds x bays
        loss = by_key[self.key(idx)]
        draw = self.s.draw_pct_day[idx] * self.connected[idx]
        drawn = np.flatnonzero(draw)
        loss[drawn] += draw[drawn, None] * np.arange(1, end - d + 1)[None, :]
        np.subtract(soc[:, None], loss, out=loss)  # (loss is a copy: by_key taken by rows)
        return np.maximum(loss, 0.0, out=loss)

    def record(self, **columns: np.ndarray) -> None:
        for name in _COLUMNS:
            self.parts[name].append(np.asarray(columns[name], dtype=_DTYPES.get(name)))


def freezing_charge(temperature_c: np.ndarray, *, none: float, every: float) -> np.ndarray:
    """The lead-acid state of charge whose electrolyte freezes at ``temperature_c`` (the
    inverse of TM 5-1185 with the BCI table, on a 0.1 % grid): a charge below it freezes.
    ``none`` where even an empty battery stays liquid, ``every`` where even a full one
    freezes."""
    grid = np.linspace(0.0, 100.0, 1001)
    freeze = freezing_point_at(grid)  # falls as the charge rises
    return np.interp(-np.asarray(temperature_c), -freeze, grid, left=none, right=every)


def _safe_soc(bay_min: np.ndarray) -> np.ndarray:
    """The least lead-acid state of charge whose electrolyte freezes at least FREEZE_MARGIN_K
    below the day's minimum (101: none is)."""
    need = bay_min - FREEZE_MARGIN_K  # freezing point must be below this
    safe = freezing_charge(need, none=0.0, every=101.0)
    return np.where(need >= freezing_point_at(np.array(0.0)), 0.0, safe)


def chargeable(s: Season, bays: np.ndarray, idx: np.ndarray, d: int,
               freeze_c: np.ndarray) -> np.ndarray:
    """Inside the battery's charge window in that bay today, with mains (lead-acid: and not
    frozen, TM 5-1185; ``freeze_c`` is its electrolyte's freezing point now)."""
    ok = (s.bay_min[bays, d] >= s.charge_min_c[idx]) & (s.bay_mean[bays, d] <= s.charge_max_c[idx])
    frozen = s.lead[idx] & (s.bay_min[bays, d] <= freeze_c)
    return ok & ~frozen & s.mains[bays]


def _place(st: _State, idx: np.ndarray, d: int, freeze_c: np.ndarray,
           thaw: np.ndarray) -> np.ndarray:
    """Where each battery can be charged today: its own bay, else the warm room; -1 nowhere.
    A battery to be thawed goes to the warm room first where there is one."""
    s = st.s
    here = chargeable(s, st.bay[idx], idx, d, freeze_c)
    if s.warm < 0:
        return np.where(here, st.bay[idx], -1)
    there = chargeable(s, np.full(len(idx), s.warm), idx, d, freeze_c)
    first = np.where(thaw & there, s.warm, np.where(here, st.bay[idx], -1))
    return np.where(first >= 0, first, np.where(there, s.warm, -1))


def _charge_act(s: Season, idx: np.ndarray, soc: np.ndarray) -> np.ndarray:
    """What a due charge is: lead-acid to full; LiFePO4 counted down from full; other
    lithium to or down to its storage level."""
    lithium = np.where(np.nan_to_num(soc, nan=0.0) > s.target[idx], Act.DISCHARGE,
                       Act.TO_STORAGE)
    return np.where(s.lead[idx], Act.TOP_UP, np.where(s.lfp[idx], Act.COUNT_DOWN, lithium))


def _intake(st: _State, idx: np.ndarray, d: int, soc: np.ndarray, freeze_c: np.ndarray):
    """Intake (or a reading): lead-acid charged full; lithium to its storage band."""
    s = st.s
    known = ~np.isnan(soc)
    low, high = s.band
    li_ok = known & (soc >= low) & (soc <= high) & ~s.lead[idx]
    lead_ok = s.lead[idx] & (soc >= s.target[idx] - FULL_WITHIN_PCT)
    need = ~(li_ok | lead_ok)
    thaw = s.lead[idx] & (s.bay_min[st.bay[idx], d] <= freeze_c + FREEZE_MARGIN_K)
    act = np.where(need, _charge_act(s, idx, soc), Act.STORE)
    return act, thaw


def _round(st: _State, idx: np.ndarray, d: int, end: int, soc: np.ndarray,
           cold: np.ndarray) -> np.ndarray:
    """At a round: charged if it would fall below its threshold by the next round, if the
    cold is coming (``cold``: its forecast reaches its freezing range) or if a charge is
    still due; a battery on a maintainer is checked there."""
    s = st.s
    k = st.key(idx)
    draw = s.draw_pct_day[idx] * st.connected[idx]
    # the forecast's last day, as ``predicted`` reckons it
    last = np.maximum(soc - ((st.cum[k, end] - st.cum[k, d]) + draw * (end - d)), 0.0)
    full = soc >= s.target[idx] - FULL_WITHIN_PCT
    need = ((last < s.threshold[idx]) | cold | st.pending[idx]) & ~full
    act = np.where(need, _charge_act(s, idx, soc), Act.CHECK)
    return np.where(s.on_maintainer[idx], Act.MAINTAINER, act)


class _Forecast:
    """The lead-acid batteries' forecasts of one visit (rows ``lead`` of ``idx``) and the days
    each is in its freezing range, kept so that only the batteries whose charge, load or bay
    changes are forecast again."""

    def __init__(self, st: _State, idx: np.ndarray, soc: np.ndarray, d: int, end: int) -> None:
        self.st, self.idx, self.d, self.end = st, idx, d, end
        self.lead = np.flatnonzero(st.s.lead[idx])
        self.soc = soc[self.lead].copy()
        self.pred = st.predicted(idx[self.lead], self.soc, d, end)
        self.cold = self._cold(self.lead, self.pred)
        self.risk = self.cold.any(axis=1)  # per lead-acid row: any day in its freezing range

    def _cold(self, rows: np.ndarray, pred: np.ndarray) -> np.ndarray:
        return pred < np.take(self.st.safe_soc[:, self.d:self.end], self.st.bay[self.idx[rows]],
                              axis=0)

    def update(self, rows: np.ndarray, soc: np.ndarray | None = None) -> None:
        """Forecast again the visit's rows ``rows`` (positions in ``idx``), from ``soc``
        where given (else from the charge they had), in their bay and with their load now."""
        chosen = np.zeros(len(self.idx), dtype=bool)
        chosen[rows] = True
        at = np.flatnonzero(chosen[self.lead])
        if not at.size:
            return
        if soc is not None:
            self.soc[at] = soc[self.lead[at]]
        self.pred[at] = self.st.predicted(self.idx[self.lead[at]], self.soc[at], self.d,
                                          self.end)
        self.cold[at] = self._cold(self.lead[at], self.pred[at])
        self.risk[at] = self.cold[at].any(axis=1)

    def at_risk(self) -> np.ndarray:
        """Per visit: its forecast reaches its freezing range before the next round."""
        out = np.zeros(len(self.idx), dtype=bool)
        out[self.lead] = self.risk
        return out

    def first_cold_day(self) -> np.ndarray:
        """Per visit: the first day (from the visit's, 0) in its freezing range; 0 if none."""
        out = np.zeros(len(self.idx), dtype=np.int64)
        out[self.lead] = np.argmax(self.cold, axis=1)
        return out

    def margins(self, until: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Up to day ``until`` (per visit): the freezing point at the lowest charge, the bay's
        lowest minimum, and the least (minimum - freezing point); NaN for lithium.

        The bay's minimum holds for a month (or period) and the charge only falls, so the
        least of each stretch of one minimum is on its last day: only those days are
        reckoned (the same values as reckoning every day), for all the visits of one bay and
        one last day at once."""
        st, d, end = self.st, self.d, self.end
        n = len(self.idx)
        freeze_c, low_c, margin = np.full(n, np.nan), np.full(n, np.nan), np.full(n, np.nan)
        position = np.full(n, -1)
        position[self.lead] = np.arange(len(self.lead))
        bays = st.bay[self.idx]
        group = bays.astype(np.int64) * (end - d) + (until - d)
        for code in np.flatnonzero(np.bincount(group)).tolist():  # a few: bays, a day or two
            bay, last = divmod(code, end - d)
            lows = st.s.bay_min[bay, d:d + last + 1]
            days = np.flatnonzero(np.r_[lows[:-1] != lows[1:], True])  # each stretch's last
            rows = np.flatnonzero(group == code)
            low_c[rows] = lows[days].min()
            lead = rows[position[rows] >= 0]
            if lead.size:
                pred = np.take(self.pred[:, days], position[lead], axis=0)
                freeze_c[lead] = freezing_point_at(pred.min(axis=1))
                margin[lead] = (lows[days][None, :] - freezing_point_at(pred)).min(axis=1)
        return freeze_c, low_c, margin


def _visit(st: _State, idx: np.ndarray, d: int, end: int, kind: np.ndarray,
           soc: np.ndarray) -> None:
    """Decide for the batteries ``idx`` visited on day ``d`` and record the visits."""
    s = st.s
    intake = kind != Kind.ROUND
    known = np.nan_to_num(soc)
    forecast = _Forecast(st, idx, known, d, end)
    before_risk = forecast.at_risk()
    freeze_now = freezing_point_at(known)
    act_i, thaw = _intake(st, idx, d, soc, freeze_now)
    act_r = _round(st, idx, d, end, soc, before_risk & ~np.isnan(soc))
    act = np.where(intake, act_i, act_r)
    act = np.where(intake & (act == Act.STORE) & s.on_maintainer[idx], Act.MAINTAINER, act)
    act = np.where(s.refused[idx], Act.REFUSED, act)
    charging = np.isin(act, CHARGES)
    where = _place(st, idx, d, freeze_now, thaw)
    act = np.where(charging & (where < 0), Act.WAIT, act)
    where = np.where((where < 0) | ~np.isin(act, CHARGES), st.bay[idx], where)
    st.pending[idx] = act == Act.WAIT
    after = np.where(np.isin(act, (*CHARGES, Act.DISCHARGE)), s.target[idx], soc)
    after = np.where(s.on_maintainer[idx] & ~s.refused[idx] & (act != Act.WAIT),
                     s.target[idx], after)
    after = np.where(np.isnan(after), s.unknown_soc, after)  # unknown, waiting: the worst
    forecast.update(np.flatnonzero(after != known), after)
    remedy, remedy_day = _remedies(st, idx, d, forecast)
    drained = _lithium_loads(st, idx, d, end, after)
    remedy = np.where(drained, Remedy.DISCONNECT, remedy)
    remedy = np.where(before_risk & (remedy == Remedy.NONE) & charging, Remedy.CHARGE_NOW,
                      remedy)
    st.soc[idx] = after
    # the margin until the next visit: the next round, or the extra top-up called for
    until = np.where(remedy == Remedy.SOONER, remedy_day, end - 1)
    freeze_c, low_c, margin = forecast.margins(until)
    risk = before_risk | ((remedy != Remedy.NONE) & s.lead[idx])
    st.record(day=np.full(len(idx), d), battery=idx, kind=kind, act=act, where=where,
              bay=st.bay[idx].copy(), soc_before=soc, soc_after=after, thaw=thaw,
              freeze=risk & ~s.on_maintainer[idx], remedy=remedy, remedy_day=remedy_day,
              freeze_c=freeze_c, low_c=low_c, margin_k=margin,
              end_day=until)


def _lithium_loads(st: _State, idx: np.ndarray, d: int, end: int,
                   soc: np.ndarray) -> np.ndarray:
    """Lithium whose load would drain it below its threshold before the next round has the
    load disconnected, where it may come off (BU-702: store lithium with its loads off)."""
    s = st.s
    rows = np.flatnonzero(~s.lead[idx] & st.connected[idx] & s.may_disconnect[idx]
                          & (s.draw_pct_day[idx] > 0) & ~s.refused[idx])
    out = np.zeros(len(idx), dtype=bool)
    if not rows.size:
        return out
    i = idx[rows]
    k = st.key(i)
    last = soc[rows] - ((st.cum[k, end] - st.cum[k, d]) + s.draw_pct_day[i] * (end - d))
    cut = rows[last < s.threshold[i]]
    st.connected[idx[cut]] = False
    out[cut] = True
    return out


def _remedies(st: _State, idx: np.ndarray, d: int,
              forecast: _Forecast) -> tuple[np.ndarray, np.ndarray]:
    """For lead-acid still at risk after the visit: disconnect its load, else move it to the
    warm room, else top it up again by the day before it reaches its freezing range."""
    s = st.s
    remedy = np.full(len(idx), Remedy.NONE)
    remedy_day = np.full(len(idx), -1)
    eligible = ~s.on_maintainer[idx] & ~s.refused[idx]
    risk = forecast.at_risk() & eligible
    load = risk & st.connected[idx] & s.may_disconnect[idx] & (s.draw_pct_day[idx] > 0)
    st.connected[idx[load]] = False
    remedy[load] = Remedy.DISCONNECT
    forecast.update(np.flatnonzero(load))
    risk = forecast.at_risk() & eligible
    if s.warm >= 0:
        move = risk & (st.bay[idx] != s.warm)
        st.bay[idx[move]] = s.warm
        remedy[move] = Remedy.MOVE
        forecast.update(np.flatnonzero(move))
        risk = forecast.at_risk() & eligible
    if risk.any():
        first = forecast.first_cold_day()
        sooner = risk & (first > 1)  # the day before is after today: a top-up can be called
        sooner[sooner] = _can_top_up(st, idx[sooner], d + first[sooner] - 1, forecast,
                                     np.flatnonzero(sooner))
        remedy[sooner] = Remedy.SOONER
        remedy_day[sooner] = d + first[sooner] - 1
        for i, day in zip(idx[sooner], remedy_day[sooner], strict=True):
            st.extra.setdefault(int(day), []).append(int(i))
        remedy[risk & ~sooner] = Remedy.NOTHING
    return remedy, remedy_day


def _can_top_up(st: _State, idx: np.ndarray, days: np.ndarray, forecast: _Forecast,
                rows: np.ndarray) -> np.ndarray:
    """Whether each battery ``idx`` (rows ``rows`` of the visit) can be charged on its day
    ``days``: in its bay or the warm room, with mains, inside its charge window and not
    frozen at the charge forecast for that day; else a top-up by then is no remedy."""
    s = st.s
    position = np.full(len(forecast.idx), -1)
    position[forecast.lead] = np.arange(len(forecast.lead))
    soc = forecast.pred[position[rows], days - forecast.d]
    freeze_c = freezing_point_at(soc)
    ok = np.zeros(len(idx), dtype=bool)
    for day in np.unique(days).tolist():  # a few days: the batteries of one day at once
        on = np.flatnonzero(days == day)
        ok[on] = chargeable(s, st.bay[idx[on]], idx[on], day, freeze_c[on])
        if s.warm >= 0:
            ok[on] |= chargeable(s, np.full(len(on), s.warm), idx[on], day, freeze_c[on])
    return ok


def _decision_days(s: Season) -> list[int]:
    days = set(s.round_days) | {int(a) for a in s.arrive} | {d for d, _i, _v in s.readings}
    return sorted(d for d in days if 0 <= d < s.days)


def _next_round(s: Season, d: int) -> int:
    later = [r for r in s.round_days if r > d]
    return later[0] if later else s.days


def _walk_days(st: _State, d: int, stop: int, soc_daily: np.ndarray,
               bay_daily: np.ndarray) -> None:
    """Days d..stop-1, with no decision among them: each present battery loses its day's
    self-discharge and load (none while a maintainer holds it), stopping at empty. The
    losses are summed in day order, as a day-by-day walk subtracts them, to the last bit."""
    s = st.s
    held = s.on_maintainer & ~st.pending & ~s.refused
    # (days, batteries): day by day down the first axis
    walk = np.empty((stop - d + 1, s.n))
    walk[0] = st.soc
    np.negative(np.take(st.sd_by_day[d:stop], st.key(np.arange(s.n)), axis=1), out=walk[1:])
    walk[1:] -= s.draw_pct_day * st.connected
    walk[1:, held] = 0.0
    whole = bool((s.arrive <= d).all() and (s.depart >= stop - 1).all())
    if not whole:
        days = np.arange(d, stop)[:, None]
        present = (s.arrive <= days) & (s.depart >= days)
        walk[1:][~present] = 0.0
    for k in range(1, len(walk)):  # the running sum, a day at a time (numpy's cumsum along
        np.add(walk[k - 1], walk[k], out=walk[k])  # the first axis is 14x slower, same sums)
    np.maximum(walk, 0.0, out=walk)
    st.soc = walk[-1].copy()
    if not whole:
        walk[1:][~present] = np.nan
    soc_daily[:, d:stop] = walk[1:].T
    bay_daily[:, d:stop] = st.bay[:, None]


def _visitors(st: _State, d: int, rounds: set[int],
              readings: dict[int, list[tuple[int, float]]]) -> tuple[np.ndarray, np.ndarray]:
    """Who is visited on day ``d``, as what, and the charge each starts from."""
    s = st.s
    kind = np.full(s.n, -1)
    present = (s.arrive <= d) & (s.depart >= d)
    if d in rounds:
        kind[present & ~st.done] = Kind.ROUND
    for i in st.extra.pop(d, []):
        if present[i]:
            kind[i] = Kind.ROUND  # the extra top-up a freeze risk called for
    kind[s.arrive == d] = Kind.INTAKE
    value = np.where(s.arrive == d, s.intake_soc, st.soc)
    for i, measured in readings.get(d, []):
        if present[i] and not s.refused[i]:
            kind[i], value[i] = Kind.READING, measured
    return kind, value


def run_season(s: Season) -> Result:
    """Walk the season (see the module docstring); every visit is recorded."""
    st = _State(s)
    # day-major in memory (the walk writes a stretch of days for every battery at once)
    soc_daily = np.full((s.n, s.days), np.nan, dtype=np.float32, order="F")
    bay_daily = np.zeros((s.n, s.days), dtype=np.int8 if s.bay_mean.shape[0] < 128 else np.int16,
                         order="F")
    rounds = set(s.round_days)
    readings: dict[int, list[tuple[int, float]]] = {}
    for day, i, value in s.readings:
        readings.setdefault(day, []).append((i, value))
    planned = set(_decision_days(s))
    d = min(planned) if planned else s.days
    while d < s.days:
        kind, value = _visitors(st, d, rounds, readings)
        idx = np.flatnonzero(kind >= 0)
        if idx.size:
            _visit(st, idx, d, _next_round(s, d), kind[idx], value[idx])
        later = [x for x in (*planned, *st.extra) if x > d]
        stop = min(later) if later else s.days
        _walk_days(st, d, stop, soc_daily, bay_daily)
        d = stop
    _release(st, soc_daily)
    parts = {c: np.concatenate(v) if v else np.zeros(0) for c, v in st.parts.items()}
    key = parts["day"].astype(np.int64) * max(s.n, 1) + parts["battery"]
    if key.size and bool((key[1:] < key[:-1]).any()):  # by day, then battery (stable)
        order = np.argsort(key, kind="stable")
        parts = {c: v[order] for c, v in parts.items()}
    visits = Visits(**parts)
    return Result(visits, soc_daily, bay_daily, st.bay, st.connected)


def _release(st: _State, soc_daily: np.ndarray) -> None:
    """The spring release: one visit per battery on its last day."""
    s = st.s
    idx = np.arange(s.n)
    last = s.depart
    soc = soc_daily[idx, last].astype(float)
    n = s.n
    nan = np.full(n, np.nan)
    st.record(day=last, battery=idx, kind=np.full(n, Kind.RELEASE), act=np.full(n, Act.RELEASE),
              where=st.bay.copy(), bay=st.bay.copy(), soc_before=soc, soc_after=soc,
              thaw=np.zeros(n, dtype=bool), freeze=np.zeros(n, dtype=bool),
              remedy=np.zeros(n, dtype=int), remedy_day=np.full(n, -1), freeze_c=nan,
              low_c=nan, margin_k=nan, end_day=last)
