"""The checker's own table of chemistry limits, independent of the profiles and the rules.

``chargeplan check`` is a second opinion: it must not share a code path with the rules that
made a plan, so it does not load the bundled profiles. These integers are written out here,
each with its source; ``tests/test_check_mutations.py`` holds them against the bundled
profiles' hard envelopes, so the two can never drift apart silently. Where this table is
tighter than an envelope (the cool and warm zones, the float ban for lithium), it says why.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["LEAD_REFERENCE_DC", "LIMITS", "ChemistryLimits", "cell_count_candidates"]


@dataclass(frozen=True, slots=True)
class ChemistryLimits:
    """Hard limits in the setpoint document's integer units (mV, dC, It as a float)."""

    chemistry: str
    family: str  # "lead_acid" or "lithium"
    nominal_cell_mV: int
    nominal_tolerance: float  # how far a trade name may sit from cells x nominal
    cell_max_mV: int
    current_max_it: float
    charge_min_dC: int
    charge_max_dC: int
    forbidden_stages: frozenset[str]
    tail_min_it: float  # a tail current below this never ends the stage in practice
    cool_below_dC: int | None = None  # the cool zone must reach at least this temperature
    cool_current_it: float | None = None  # and hold the current at most to this
    warm_above_dC: int | None = None  # the warm zone must begin at or below this
    warm_cell_max_mV: int | None = None  # and hold the cell voltage at most to this
    compensation_uV: tuple[int, int] | None = None  # accepted coefficient, most..least negative
    # lead-acid fault guards (P410): the loosest Ah cap of a program, in It of the rated
    # capacity; the largest temperature rise; the largest current rise at constant voltage
    guard_cap_it: float | None = None
    guard_rise_max_dK: int | None = None
    guard_current_rise_max_it: float | None = None
    # lead-acid voltages by stage kind, per cell at the reference temperature (CK315, CK606):
    # a charging stage (bulk, absorption) and a held one (float, storage hold)
    charge_cell_max_mV: int | None = None
    hold_cell_max_mV: int | None = None
    # lithium: the longest constant-voltage stage (absorption, storage hold) and the most
    # charge a bulk timer may allow at the lowest current the document runs at (CK316); the
    # highest storage-hold cell voltage (CK317)
    cv_timer_max_s: int | None = None
    bulk_timer_charge_max_it: float | None = None
    storage_cell_max_mV: int | None = None
    # connection (P411): the lowest no-battery threshold per cell (below it a cell is dead,
    # never revived), the lowest pre-charge threshold per cell (lithium)
    dead_cell_min_mV: int = 0
    precharge_cell_min_mV: int | None = None
    # lithium restart (P412): at least this far below the charge voltage per cell, after at
    # least this long below it
    restart_below_cell_min_mV: int | None = None
    restart_filter_min_s: int | None = None

    @property
    def lithium(self) -> bool:
        return self.family == "lithium"


#: Lead-acid compensation: BU-410 "Charging at High and Low Temperatures" gives -3 mV/K per
#: cell, other sources up to -5 (REFERENCES: -3 to -5); makers' datasheets quote -2 to -6
#: (from memory), the margin this range allows. Positive (wrong sign) or ten times too large
#: is refused.
_LEAD_COMPENSATION = (-6000, -2000)
#: The temperature the lead-acid stage voltages below are given at: 25 degC (common
#: practice: datasheets and BU-403's voltages are quoted at 25 degC, from memory). Away from
#: it a voltage may move by the coefficient range above: up to 6 mV/K/cell more in the cold,
#: and at least 2 mV/K/cell less in the heat (BU-410: lower the voltage when hot), inside
#: the charge window (BU-410 Table 1), unless the battery file gives the maker's coefficient.
LEAD_REFERENCE_DC = 250
#: A held lead-acid stage (float, storage hold): BU-403 float 2.25-2.27 V/cell, IEC 62485-2
#: Table 1 2.23 V/cell vented and 2.27 V/cell VRLA; 2.30 V/cell is the top of the band with
#: a margin (common practice: a float above about 2.30 V/cell gasses and dries the battery).
_LEAD_HOLD_CELL_MV = 2300
_LEAD = dict(
    family="lead_acid", nominal_cell_mV=2000,  # IEC 62485-2: nominal 2.0 V per cell
    nominal_tolerance=0.05,  # common practice: 12 V is 6 cells, 24 V is 12
    charge_min_dC=-200, charge_max_dC=500,  # BU-410 Table 1: lead-acid -20 to 50 degC
    tail_min_it=0.005,  # BU-403: the absorption ends at 0.5-5 % of C
    cool_below_dC=0, cool_current_it=0.30,  # BU-410 Table 1: at most 0.3 C below freezing
    compensation_uV=_LEAD_COMPENSATION,
    # common practice (reasoning in DEVELOPERS.md "Lead-acid termination and guards"): a
    # charge that warms the battery 10 K within a stage goes into heat; BU-403: at constant
    # voltage a healthy battery's current falls, a rise of 1 % of C is thermal runaway
    guard_rise_max_dK=100, guard_current_rise_max_it=0.01,
    hold_cell_max_mV=_LEAD_HOLD_CELL_MV,
    # from memory: a lead-acid battery resting below about 1 V/cell has a shorted or ruined
    # cell; the no-battery threshold may not sit lower (P411)
    dead_cell_min_mV=1000,
)
_LITHIUM_FORBIDDEN = frozenset({"equalization", "desulfation", "float"})
_LITHIUM = dict(
    family="lithium",
    nominal_tolerance=0.08,  # common practice: 12.8 V LiFePO4 is sold as "12 V"
    current_max_it=1.0,  # BU-409 Charging Lithium-ion: 0.5-1 C; LFP handling guidelines 1 C
    charge_min_dC=0, charge_max_dC=450,  # BU-410 Table 1: lithium-ion 0 to 45 degC
    # BU-808a / BU-702: no trickle or float for lithium-ion; never equalization or desulfation
    forbidden_stages=_LITHIUM_FORBIDDEN,
    tail_min_it=0.01,  # BU-409: terminate at 1-10 % of C
    # BU-409: no trickle or float; the constant-voltage stage ends on the tail or a timer.
    # 4 h: charger ICs time out the constant-voltage phase after a few hours (common
    # practice, from memory; BU-409: a full charge takes about 3 h); the profiles' 2 h with
    # its 1.1x margin sits inside it
    cv_timer_max_s=4 * 3600,
    # a bulk timer may let at most twice the rated capacity in at the lowest current the
    # document runs at (the rules' timer margin 1.5x on a flat battery, common practice;
    # more is a stage that never times out)
    bulk_timer_charge_max_it=2.0,
    # BU-808a: never revive lithium cells that sat below 1.5 V/cell
    dead_cell_min_mV=1500,
    # charger-IC practice: restart about 100 mV/cell below regulation (from memory); at
    # least half of it, after at least 10 s of rest (common practice: the relaxation after a
    # charge), else the charger tops the pack up again and again, a float (BU-409)
    restart_below_cell_min_mV=50, restart_filter_min_s=10,
)

LIMITS: dict[str, ChemistryLimits] = {
    # flooded: 2.67 V/cell, the highest equalization voltage across sources
    # (2.67 V/cell, BU equalizing-charge text); 0.30 It BU-403 typical charge current
    # Ah cap 1.5 C: the published charge factor 1.10-1.30 (common practice) with a margin
    # charging stages at most 2.50 V/cell at 25 degC: the profiles' 2.40-2.47 (IEC 62485-2
    # Table 1 boost 2.40; EN 50342-1 cl. 8.2.2 test charge 2.47) with a margin for makers'
    # deep-cycle values (from memory); 2.67 V/cell is equalization only
    "flooded": ChemistryLimits("flooded", cell_max_mV=2670, current_max_it=0.30,
                               forbidden_stages=frozenset(), guard_cap_it=1.5,
                               charge_cell_max_mV=2500, **_LEAD),
    # AGM: 2.55 V/cell VRLA maker limits with cold compensation (from memory); 0.5 It
    # (from memory: AGM makers allow up to 0.3-0.5 C)
    # Ah cap 1.35 C: VRLA's charge factor 1.02-1.15 (common practice) with a margin
    # charging stages at most 2.50 V/cell at 25 degC (from memory: AGM makers 2.40-2.50)
    "agm": ChemistryLimits("agm", cell_max_mV=2550, current_max_it=0.50,
                           forbidden_stages=frozenset(), guard_cap_it=1.35,
                           charge_cell_max_mV=2500, **_LEAD),
    # gel: 2.50 V/cell, 0.30 It (from memory: gel maker limits); no equalization or
    # desulfation (common practice: gel and AGM get none unless the maker allows it)
    "gel": ChemistryLimits("gel", cell_max_mV=2500, current_max_it=0.30,
                           forbidden_stages=frozenset({"equalization", "desulfation"}),
                           # charging stages at most 2.45 V/cell at 25 degC (from memory: gel
                           # makers 2.35-2.45)
                           guard_cap_it=1.35, charge_cell_max_mV=2450, **_LEAD),
    # LiFePO4: nominal 3.2 V/cell, absolute maximum 3.65 V/cell, at most 0.2 C below 10 degC
    # (cell handling guidelines, common practice)
    # storage hold at most 3.40 V/cell: about a rested full cell (from memory), so a hold
    # never keeps it charged; the profile's 3.28 V/cell is 50 % (BU-702: store at 40-50 %);
    # pre-charge below 2.0 V/cell at least (from memory: LFP discharge cut-off 2.0-2.5 V/cell)
    "lifepo4": ChemistryLimits("lifepo4", nominal_cell_mV=3200, cell_max_mV=3650,
                               cool_below_dC=100, cool_current_it=0.20,
                               storage_cell_max_mV=3400, precharge_cell_min_mV=2000,
                               **_LITHIUM),
    # NMC: 4.20 V/cell (BU-808); nominal 3.6-3.7 V/cell (common practice). JEITA guideline
    # (2007), as summarised in charger-IC datasheets: cool zone 0-10 degC with the current
    # cut to 20-50 % (here: at most half the 1 It maximum); warm zone from 45 degC at the
    # latest, voltage cut to about 4.10-4.15 V/cell (here: at most 4.15 V/cell)
    "nmc": ChemistryLimits("nmc", nominal_cell_mV=3600, cell_max_mV=4200,
                           cool_below_dC=100, cool_current_it=0.50,
                           warm_above_dC=450, warm_cell_max_mV=4150,
                           # storage hold at most 3.90 V/cell: BU-702 stores Li-ion at 40-50 %,
                           # about 3.7-3.85 V/cell (from memory), with a margin; pre-charge
                           # below 2.5 V/cell at least (BU-808a: pre-charge below the 2.5-3.0
                           # V/cell cut-off)
                           storage_cell_max_mV=3900, precharge_cell_min_mV=2500,
                           **_LITHIUM),
}


def cell_count_candidates(nominal_mV: float, limits: ChemistryLimits) -> set[int]:
    """Cell counts whose nominal voltage lies within the chemistry's tolerance of
    ``nominal_mV`` (the checker's own arithmetic; the rules have theirs)."""
    if not nominal_mV > 0:
        return set()
    guess = nominal_mV / limits.nominal_cell_mV
    return {n for n in range(max(1, int(guess * 0.8)), int(guess * 1.2) + 2)
            if abs(n * limits.nominal_cell_mV - nominal_mV) <= limits.nominal_tolerance
            * nominal_mV}
