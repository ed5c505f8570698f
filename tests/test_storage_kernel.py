"""The storage kernel's shortcuts against the plain definitions they stand for.

The kernel forecasts each visit once, reckons the freeze margin only on the last day of each
stretch of one bay minimum, and finds the first freezing day only among battery-days near
their freezing charge. Here each result is recomputed the long way, battery-day by
battery-day, from the freezing point of US Army TM 5-1185 Table III (with the BCI gravity
table) and the season the kernel walked.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pytest

from chargeplan.model.storage import SiteFile
from chargeplan.physics.electrolyte import freezing_point_tm5_1185, specific_gravity_bci
from chargeplan.planners.storage import plan_storage
from chargeplan.planners.storage_kernel import Kind, Remedy


def _freezing_point(soc):
    return freezing_point_tm5_1185(specific_gravity_bci(np.clip(soc, 0.0, 100.0)))


def _cold_site(n: int, seed: int) -> SiteFile:
    """A cold-climate depot (monthly minima, so a round interval spans two minima), loads
    that stay connected or may be disconnected, low and full batteries, a warm room."""
    rng = np.random.default_rng(seed)
    chems = ["flooded", "agm", "gel", "lifepo4", "nmc"]
    inventory = []
    for i in range(n):
        chem = chems[i % 5]
        size = {"cells_in_series": 3} if chem == "nmc" else {"nominal_voltage": "12 V"}
        extra = {}
        if i % 4 == 0:
            extra = {"parasitic_draw": f"{rng.integers(20, 150)} mA",
                     "loads": "connected" if i % 8 == 0 else "disconnected"}
        inventory.append({"id": f"K{i}", "chemistry": chem, **size,
                          "capacity": f"{rng.integers(10, 120)} Ah",
                          "state_of_charge": f"{rng.integers(20, 101)} %",
                          "bay": ["yard", "shed", "loft"][i % 3], **extra})
    months = [(11, -2, -12), (12, -8, -24), (1, -12, -30), (2, -9, -26), (3, -3, -14)]
    return SiteFile.model_validate({
        "site": {"name": "Fell-side depot", "start": dt.date(2026, 11, 3), "duration": "140 d",
                 "round_interval": "12 d", "policy": "top-up", "warm_room": "loft"},
        "monthly": [{"month": m, "mean": f"{a} degC", "min": f"{b} degC"}
                    for m, a, b in months],
        "bays": [{"name": "yard"}, {"name": "shed", "mains": True},
                 {"name": "loft", "mains": True, "offset": "+16 K"}],
        "inventory": inventory,
    })


@pytest.mark.parametrize("seed", [1, 2])
def test_freeze_margin_equals_every_day_of_the_interval(seed):
    """Each lead-acid visit's freezing point, bay minimum and margin are those of the
    charge the season then walks, day by day, up to the visit's last day (TM 5-1185)."""
    plan = plan_storage(_cold_site(150, seed), plan_top_ups=False)
    v = plan.visits
    assert (v.remedy != Remedy.NONE).any()  # the site exercises the remedies
    checked = 0
    for k in np.flatnonzero(plan.fleet.lead[v.battery] & (v.kind != Kind.RELEASE)):
        i, d, last = int(v.battery[k]), int(v.day[k]), int(v.end_day[k])
        later = v.day[(v.battery == i) & (v.day > d)]
        if plan.on_maintainer[i] or (later.size and later.min() <= last):
            continue  # held, or visited again inside the interval: not the forecast's season
        soc = plan.soc_daily[i, d:last + 1].astype(float)
        lows = plan.bay_min[plan.bay_daily[i, d:last + 1], np.arange(d, last + 1)]
        assert v.low_c[k] == lows.min()
        assert v.freeze_c[k] == pytest.approx(_freezing_point(soc.min()), abs=1e-4)
        assert v.margin_k[k] == pytest.approx((lows - _freezing_point(soc)).min(), abs=1e-4)
        checked += 1
    assert checked > 200


@pytest.mark.parametrize(("low", "high"), [(0.0, 60.0), (20.0, 100.0), (0.0, 100.0)])
def test_first_freeze_day_equals_checking_every_battery_day(low, high):
    """The first day a lead-acid battery's electrolyte freezes (the day's minimum at or below
    its freezing point, TM 5-1185), found as a check of every battery-day would find it."""
    plan = plan_storage(_cold_site(200, 3), plan_top_ups=False)
    rng = np.random.default_rng(int(high))
    soc = rng.uniform(low, high, plan.soc_daily.shape).astype(np.float32)
    soc[rng.random(soc.shape) < 0.05] = np.nan  # days a battery is away
    plan.soc_daily = soc
    plan.__dict__.pop("first_freeze_day", None)
    lows = plan.bay_min[plan.bay_daily, np.arange(len(plan.dates))[None, :]]
    frozen = plan.fleet.lead[:, None] & (
        lows <= _freezing_point(np.nan_to_num(soc.astype(float), nan=100.0)))
    expected = np.where(frozen.any(axis=1), np.argmax(frozen, axis=1), -1)
    assert frozen.any() and not frozen.all()
    assert np.array_equal(plan.first_freeze_day, expected)
