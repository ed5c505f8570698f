"""An equivalent-circuit charge simulation of many batteries at once.

Per cell, the battery is an open-circuit voltage that follows its state of charge
(the profile's rested table), an ohmic resistance that rises in the cold, and a
charge-acceptance branch whose conductance falls as the cell fills
(``(1 - soc)^p / R_acc``). Lead-acid adds a gassing side reaction that carries
current without storing charge: exponential in voltage between the two published
points of IEC 62485-2 (float and boost gas currents of a full battery), doubling per
10 K. So lead-acid losses rise toward full and lithium's stay near 1 %::

    V_terminal = x + I * R_ohm
    I          = (x - OCV(soc)) * (1 - soc)^p / R_acc  +  G * exp((x - V_g) / b)
    d soc / dt = eta * I_main / capacity

Each battery runs its own stages: the charger is a current-limited voltage source
(``I = min(I_set, I_cv)``), so constant current turns into constant voltage by
itself, and a stage ends on its own exits (voltage reached, current below, duration).
Float and a lead-acid storage hold have no exit; they are run for a day to give
their standing current. All batteries step together as numpy arrays, each with its
own time step (0.2 % of capacity per step); a finished battery stops contributing.
One battery is the case N = 1.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

__all__ = [
    "HOLD_WINDOW_S",
    "CellParameters",
    "SimulationResult",
    "StageArrays",
    "ocv_grid",
    "simulate_charge",
]

#: How long a stage without exits (float, lead-acid storage hold) is run to estimate it.
HOLD_WINDOW_S = 86_400.0
#: Charge moved per time step, as a fraction of capacity.
SOC_STEP = 0.002
DT_MIN_S = 1.0
DT_MAX_S = 600.0
#: A stage still running after this many steps is reported as not converged.
MAX_STEPS = 200_000
_GRID = 101  # state-of-charge grid points of the OCV tables (0, 1, ..., 100 %)
_NEWTON = 8


def ocv_grid(table: list[tuple[float, float]] | np.ndarray) -> np.ndarray:
    """A profile's ``(soc %, V/cell)`` table resampled on 0, 1, …, 100 %."""
    rows = np.asarray(table, dtype=float)
    return np.interp(np.linspace(0.0, 100.0, _GRID), rows[:, 0], rows[:, 1])


@dataclass
class CellParameters:
    """Per-battery model parameters, arrays of shape (N,); per cell unless named."""

    capacity_ah: np.ndarray
    cells: np.ndarray
    table_index: np.ndarray  # row of ``tables`` each battery uses
    tables: np.ndarray  # (T, 101) OCV per cell on the state-of-charge grid
    ohmic_ohm_ah: np.ndarray
    acceptance_ohm_ah: np.ndarray
    acceptance_exponent: np.ndarray
    resistance_doubling_k: np.ndarray
    coulombic_efficiency: np.ndarray
    gas_a_per_ah: np.ndarray  # gas current of a full battery at gas_voltage_v (0: none)
    gas_voltage_v: np.ndarray
    gas_slope_v: np.ndarray  # volts per e-fold of gas current
    gas_doubling_k: np.ndarray
    temperature_c: np.ndarray
    soc_start: np.ndarray  # 0..1


@dataclass
class StageArrays:
    """Each battery's stages, arrays of shape (N, S); unused stage slots are absent."""

    present: np.ndarray  # bool
    voltage_v_cell: np.ndarray  # limit / regulation voltage per cell
    current_a: np.ndarray  # current limit
    exit_voltage_v_cell: np.ndarray  # nan: no such exit
    exit_current_a: np.ndarray  # nan: no such exit
    exit_duration_s: np.ndarray  # inf: no such exit
    stop_after: np.ndarray  # bool: charging stops when this stage ends


@dataclass
class SimulationResult:
    """Per battery and stage (N, S): time, charge and energy in, and how it ended."""

    duration_s: np.ndarray
    charge_ah: np.ndarray
    energy_wh: np.ndarray
    end_current_a: np.ndarray
    end_soc: np.ndarray
    held: np.ndarray  # bool: a stage without exits, run for HOLD_WINDOW_S
    converged: np.ndarray  # bool per battery
    series: dict[str, np.ndarray] = field(default_factory=dict)  # N = 1 with record=True


def _ocv(p: CellParameters, rows: np.ndarray, soc: np.ndarray) -> np.ndarray:
    position = np.clip(soc, 0.0, 1.0) * (_GRID - 1)
    low = np.minimum(position.astype(np.int64), _GRID - 2)
    frac = position - low
    table = p.tables[p.table_index[rows]]
    take = np.arange(rows.size)
    return table[take, low] * (1.0 - frac) + table[take, low + 1] * frac


def simulate_charge(
    p: CellParameters, s: StageArrays, *, record: bool = False
) -> SimulationResult:
    """Run every battery through its stages; see the module docstring for the model."""
    n, stages = s.present.shape
    duration = np.zeros((n, stages))
    charge = np.zeros((n, stages))
    energy = np.zeros((n, stages))
    end_current = np.full((n, stages), np.nan)
    end_soc = np.full((n, stages), np.nan)
    held = ~np.isfinite(s.exit_duration_s) & np.isnan(s.exit_voltage_v_cell) & np.isnan(
        s.exit_current_a
    ) & s.present
    converged = np.ones(n, dtype=bool)

    soc = np.clip(p.soc_start.astype(float), 0.0, 1.0)
    stage = np.zeros(n, dtype=np.int64)
    t_stage = np.zeros(n)
    steps = np.zeros(n, dtype=np.int64)
    t_clock = 0.0
    series: dict[str, list[float]] = {"time_s": [], "stage": [], "voltage_v": [],
                                      "current_a": [], "soc": []}

    # constants per battery
    cap = p.capacity_ah.astype(float)
    temperature = np.clip(p.temperature_c.astype(float), -30.0, 60.0)
    r_ohm = p.ohmic_ohm_ah / cap * np.exp2((25.0 - temperature) / p.resistance_doubling_k)
    r_acc = p.acceptance_ohm_ah / cap * np.exp2((25.0 - temperature) / p.resistance_doubling_k)
    gas = cap * p.gas_a_per_ah * np.exp2((temperature - 25.0) / p.gas_doubling_k)
    has_gas = gas > 0
    slope = np.where(has_gas, p.gas_slope_v, 1.0)

    active = np.flatnonzero(s.present[:, 0])
    converged[~s.present[:, 0]] = False
    while active.size:
        a = active
        k = stage[a]
        v_set = s.voltage_v_cell[a, k]
        i_set = s.current_a[a, k]
        e = _ocv(p, a, soc[a])
        g_acc = np.maximum((1.0 - soc[a]) ** p.acceptance_exponent[a], 1e-12) / r_acc[a]
        r = r_ohm[a]
        g, vg, b = gas[a], p.gas_voltage_v[a], slope[a]

        # constant voltage: the internal voltage x where the branches take what R passes
        x = np.where(has_gas[a], v_set, (v_set / r + e * g_acc) / (1.0 / r + g_acc))
        for _ in range(_NEWTON):
            gas_i = g * np.exp(np.minimum((x - vg) / b, 50.0))
            f = (v_set - x) / r - (x - e) * g_acc - gas_i
            x = x - f / (-1.0 / r - g_acc - gas_i / b)
        i_cv = np.where(v_set > e, np.maximum((v_set - x) / r, 0.0), 0.0)
        # constant current: the internal voltage x where the branches take i_set; start from
        # the lower of the two voltages at which one branch alone would take it all
        xc = e + i_set / g_acc
        with np.errstate(divide="ignore"):
            gas_only = vg + b * np.log(np.where(has_gas[a], i_set / np.maximum(g, 1e-300), 1.0))
        xc = np.where(has_gas[a], np.maximum(np.minimum(xc, gas_only), e), xc)
        for _ in range(_NEWTON):
            gas_i = g * np.exp(np.minimum((xc - vg) / b, 50.0))
            f = (xc - e) * g_acc + gas_i - i_set
            xc = xc - f / (g_acc + gas_i / b)
        in_cc = i_set <= i_cv
        current = np.where(in_cc, i_set, i_cv)
        x = np.where(in_cc, xc, x)
        v_term = np.where(in_cc, xc + i_set * r, np.where(i_cv > 0, v_set, e))
        i_main = np.clip((x - e) * g_acc, 0.0, current)

        dt = np.clip(SOC_STEP * cap[a] * 3600.0 / np.maximum(current, 1e-9), DT_MIN_S, DT_MAX_S)
        left = np.where(held[a, k], HOLD_WINDOW_S, s.exit_duration_s[a, k]) - t_stage[a]
        dt = np.minimum(dt, np.maximum(left, 1e-6))

        if record:
            series["time_s"].append(t_clock)
            series["stage"].append(float(k[0]))
            series["voltage_v"].append(float(v_term[0] * p.cells[a][0]))
            series["current_a"].append(float(current[0]))
            series["soc"].append(float(soc[a][0]))
            t_clock += float(dt[0])

        soc[a] = np.minimum(soc[a] + p.coulombic_efficiency[a] * i_main * dt / (cap[a] * 3600.0),
                            1.0)
        duration[a, k] += dt
        charge[a, k] += current * dt / 3600.0
        energy[a, k] += current * v_term * p.cells[a] * dt / 3600.0
        t_stage[a] += dt
        steps[a] += 1

        exit_v = s.exit_voltage_v_cell[a, k]
        exit_i = s.exit_current_a[a, k]
        ended = (
            (np.isfinite(exit_v) & (v_term >= exit_v - 1e-9))
            | (np.isfinite(exit_i) & (current < exit_i))
            | (t_stage[a] >= s.exit_duration_s[a, k] - 1e-9)
            | (held[a, k] & (t_stage[a] >= HOLD_WINDOW_S - 1e-9))
        )
        stuck = steps[a] >= MAX_STEPS
        if ended.any() or stuck.any():
            end_current[a[ended], k[ended]] = current[ended]
            end_soc[a[ended], k[ended]] = soc[a[ended]]
            nxt = k + 1
            last = nxt >= stages
            nxt_present = np.zeros_like(ended)
            nxt_present[~last] = s.present[a[~last], nxt[~last]]
            finished = ended & (s.stop_after[a, k] | held[a, k] | ~nxt_present)
            moving = ended & ~finished
            stage[a[moving]] = nxt[moving]
            t_stage[a[moving]] = 0.0
            steps[a[moving]] = 0
            converged[a[stuck & ~ended]] = False
            active = a[~(finished | (stuck & ~ended))]

    result = SimulationResult(duration, charge, energy, end_current, end_soc, held, converged)
    if record:
        result.series = {key: np.asarray(values) for key, values in series.items()}
    return result
