"""An equivalent-circuit charge simulation of many batteries at once.

Per cell, the battery is an open-circuit voltage that follows its state of charge
(the profile's rested table), an ohmic resistance, and an acceptance (polarization)
conductance that falls as the cell fills. Both resistances follow temperature, doubling
per the profile's ``resistance_doubling`` kelvin of cooling. The acceptance follows a power
of Shepherd's form, ``g = (1 - soc)**p / (R_acc * (soc + 0.05))`` (C. M. Shepherd,
J. Electrochem. Soc. 112, 1965, where p = 1; the 0.05 keeps it finite when empty).
Lithium takes Shepherd's p = 1. Lead-acid gives its own p, below 1: with R_acc it is
calibrated to BU-403 (at 0.1 It the constant-current stage ends near 70 % charged, a higher
current reaches the voltage sooner, and at the topping voltage the current falls to the
tail current as the battery becomes full). A full battery accepts nothing more: what still
flows is the side reaction.

Lead-acid adds a side reaction (gassing, and in VRLA the oxygen cycle) that carries
current without storing charge: exponential in voltage through IEC 62485-2 Table 1's two
typical currents of a full battery (float and boost), doubling per 10 K. Its ``Igas``
figures, which carry a safety factor of 5, stay with ventilation. The main reaction's
coulombic efficiency sets the rest of the charge factor::

    V_terminal = x + I * R_ohm
    I          = (x - OCV(soc)) * g(soc)  +  G * exp((x - V_g) / b)
    d soc / dt = eta * I_main / capacity

Each battery runs its own stages: the charger is a current-limited voltage source
(``I = min(I_set, I_cv)``), so constant current turns into constant voltage by
itself, and a stage ends on its own exits (voltage reached, current below, duration, and
the charge-above guard, which counts every Ah put in since the charge began and stops the
charge with a fault). Float and a lead-acid storage hold have no exit; they are run for a
day to give their standing current. All batteries step together as numpy arrays, each with
its own time step (1 % of capacity per step, less near full); a finished battery stops
contributing. One battery is the case N = 1.
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
SOC_STEP = 0.01
#: ... but at most this share of the charge still missing (steps shrink toward full).
TAIL_STEP = 0.1
DT_MIN_S = 1.0
DT_MAX_S = 1800.0
HOLD_DT_MAX_S = 3600.0
#: A stage still running after this many steps is reported as not converged.
MAX_STEPS = 20_000
#: Keeps the polarization resistance finite for an empty cell (model choice).
SHEPHERD_OFFSET = 0.05
_GRID = 101  # state-of-charge grid points of the OCV tables (0, 1, ..., 100 %)
_NEWTON = 3


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
    resistance_doubling_k: np.ndarray
    coulombic_efficiency: np.ndarray
    gas_a_per_ah: np.ndarray  # gas current of a full battery at gas_voltage_v (0: none)
    gas_voltage_v: np.ndarray
    gas_slope_v: np.ndarray  # volts per e-fold of gas current
    gas_doubling_k: np.ndarray
    temperature_c: np.ndarray
    soc_start: np.ndarray  # a fraction, 0..1 (the plan's state_of_charge_pct / 100)
    acceptance_exponent: np.ndarray | None = None  # lead-acid's power of (1 - soc);
    #                                                 nan or None: Shepherd's form


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
    exit_charge_ah: np.ndarray | None = None  # inf or None: no charge-above guard (Ah put in
    #                                            since the charge began; a fault)


@dataclass
class SimulationResult:
    """Per battery and stage (N, S): time, charge and energy in, and how it ended."""

    duration_s: np.ndarray
    charge_ah: np.ndarray
    energy_wh: np.ndarray
    end_current_a: np.ndarray
    end_soc: np.ndarray  # a fraction, 0..1
    held: np.ndarray  # bool: a stage without exits, run for HOLD_WINDOW_S
    charge_capped: np.ndarray  # bool: the stage ended on its charge-above guard (a fault)
    converged: np.ndarray  # bool per battery
    series: dict[str, np.ndarray] = field(default_factory=dict)  # N = 1 with record=True


def simulate_charge(
    p: CellParameters, s: StageArrays, *, record: bool = False
) -> SimulationResult:
    """Run every battery through its stages; see the module docstring for the model.

    The active batteries' state lives in compacted arrays (position i is battery
    ``rows[i]``), so each step is plain element-wise numpy with no gathers; arrays are
    compacted again only when batteries finish.
    """
    n, width = s.present.shape
    if s.exit_charge_ah is None:
        s.exit_charge_ah = np.full((n, width), np.inf)
    if record and n != 1:
        raise ValueError("record=True follows one battery; simulate it alone")
    duration = np.zeros((n, width))
    charge = np.zeros((n, width))
    energy = np.zeros((n, width))
    end_current = np.full((n, width), np.nan)
    end_soc = np.full((n, width), np.nan)
    held_all = (~np.isfinite(s.exit_duration_s) & np.isnan(s.exit_voltage_v_cell)
                & np.isnan(s.exit_current_a) & s.present)
    capped_all = np.zeros((n, width), dtype=bool)
    converged = s.present[:, 0].copy()
    series: dict[str, list[float]] = {"time_s": [], "stage": [], "voltage_v": [],
                                      "current_a": [], "soc": []}

    rows = np.flatnonzero(s.present[:, 0])
    cap = p.capacity_ah[rows].astype(float)
    temperature = np.clip(p.temperature_c[rows].astype(float), -30.0, 60.0)
    cold = np.exp2((25.0 - temperature) / p.resistance_doubling_k[rows])
    r = p.ohmic_ohm_ah[rows] / cap * cold
    r_acc = p.acceptance_ohm_ah[rows] / cap * cold
    power = (np.ones(rows.size) if p.acceptance_exponent is None
             else np.nan_to_num(p.acceptance_exponent[rows].astype(float), nan=1.0))
    eta = p.coulombic_efficiency[rows].astype(float)
    gas = cap * p.gas_a_per_ah[rows] * np.exp2((temperature - 25.0) / p.gas_doubling_k[rows])
    vg = p.gas_voltage_v[rows].astype(float)
    b = np.where(gas > 0, p.gas_slope_v[rows], 1.0)
    cells = p.cells[rows].astype(float)
    flat = p.tables.ravel()
    base = p.table_index[rows] * _GRID
    soc = np.clip(p.soc_start[rows].astype(float), 0.0, 1.0)
    stage = np.zeros(rows.size, dtype=np.int64)
    t_stage = np.zeros(rows.size)
    steps = np.zeros(rows.size, dtype=np.int64)
    acc = np.zeros((3, rows.size))  # this stage's seconds, Ah, Wh
    charged = np.zeros(rows.size)  # Ah in since the charge began
    t_clock = 0.0

    def stage_params(r_: np.ndarray, k_: np.ndarray) -> list[np.ndarray]:
        return [s.voltage_v_cell[r_, k_], s.current_a[r_, k_], s.exit_voltage_v_cell[r_, k_],
                s.exit_current_a[r_, k_],
                np.where(held_all[r_, k_], HOLD_WINDOW_S, s.exit_duration_s[r_, k_]),
                held_all[r_, k_], s.stop_after[r_, k_], s.exit_charge_ah[r_, k_]]

    v_set, i_set, exit_v, exit_i, exit_t, held, stop, exit_q = stage_params(rows, stage)
    any_gas = bool(np.any(gas > 0))
    warm = np.zeros(rows.size, dtype=bool)  # x_last / xc_last hold this stage's last roots
    x_last = xc_last = np.zeros(rows.size)

    while rows.size:
        position = soc * (_GRID - 1)
        low = np.minimum(position.astype(np.int64), _GRID - 2)
        frac = position - low
        e = flat[base + low] * (1.0 - frac) + flat[base + low + 1] * frac
        # a full battery accepts nothing: the floor keeps the constant-current root finite,
        # and is small enough that a small power (missing ** 0.1) of it is nothing too
        missing = np.maximum(1.0 - soc, 1e-200)
        g_acc = missing ** power / (r_acc * (soc + SHEPHERD_OFFSET))

        # constant voltage: the internal voltage x at which the branches take what R passes
        x = (v_set / r + e * g_acc) / (1.0 / r + g_acc)
        # constant current: the internal voltage at which the branches take i_set
        xc = e + i_set / g_acc
        if any_gas:
            # Newton from the last step's root (it moves little between steps), or from
            # an upper bound on the first step of a stage
            x = np.where(gas > 0, np.where(warm, x_last, v_set), x)
            with np.errstate(divide="ignore"):
                gas_only = vg + b * np.log(np.where(gas > 0, i_set / np.maximum(gas, 1e-300),
                                                    1.0))
            bound = np.maximum(np.minimum(xc, gas_only), e)
            xc = np.where(gas > 0, np.where(warm, np.minimum(xc_last, bound), bound), xc)
            for _ in range(_NEWTON):
                gas_x = gas * np.exp(np.minimum((x - vg) / b, 50.0))
                x = x - ((v_set - x) / r - (x - e) * g_acc - gas_x) / (-1.0 / r - g_acc
                                                                      - gas_x / b)
                gas_c = gas * np.exp(np.minimum((xc - vg) / b, 50.0))
                xc = xc - ((xc - e) * g_acc + gas_c - i_set) / (g_acc + gas_c / b)
            x_last, xc_last = x, xc
            warm[:] = True
        i_cv = np.where(v_set > e, np.maximum((v_set - x) / r, 0.0), 0.0)
        in_cc = i_set <= i_cv
        current = np.where(in_cc, i_set, i_cv)
        x = np.where(in_cc, xc, x)
        v_term = np.where(in_cc, xc + i_set * r, np.where(i_cv > 0, v_set, e))
        i_main = np.clip((x - e) * g_acc, 0.0, current)

        # a stage ends on the state at the start of the step, before it would move on
        capped = charged >= exit_q - 1e-9
        ended = (
            (v_term >= exit_v - 1e-9)  # a nan limit compares False
            | (current < exit_i)
            | (t_stage >= exit_t - 1e-9)
            | capped
        )
        # a step moves SOC_STEP of capacity, and less near full, where acceptance changes
        # fastest; a hold stage may take long steps
        step = np.minimum(SOC_STEP, TAIL_STEP * (1.0 - soc) + 1e-5)
        dt = np.clip(step * cap * 3600.0 / np.maximum(i_main, 1e-9), DT_MIN_S,
                     np.where(held, HOLD_DT_MAX_S, DT_MAX_S))
        dt = np.where(ended, 0.0, np.minimum(dt, np.maximum(exit_t - t_stage, 1e-6)))
        # ... and stops where the charge-above guard would trip
        dt = np.minimum(dt, np.maximum(exit_q - charged, 1e-9) * 3600.0
                        / np.maximum(current, 1e-9))

        if record and dt[0] > 0:
            series["time_s"].append(t_clock)
            series["stage"].append(float(stage[0]))
            series["voltage_v"].append(float(v_term[0] * cells[0]))
            series["current_a"].append(float(current[0]))
            series["soc"].append(float(soc[0]))
            t_clock += float(dt[0])

        soc = np.minimum(soc + eta * i_main * dt / (cap * 3600.0), 1.0)
        acc[0] += dt
        acc[1] += current * dt / 3600.0
        charged += current * dt / 3600.0
        acc[2] += current * v_term * cells * dt / 3600.0
        t_stage += dt
        steps += 1
        stuck = steps >= MAX_STEPS
        if not (ended.any() or stuck.any()):
            continue
        done = ended | stuck
        r_done, k_done = rows[done], stage[done]
        duration[r_done, k_done] = acc[0, done]
        charge[r_done, k_done] = acc[1, done]
        energy[r_done, k_done] = acc[2, done]
        end_current[r_done, k_done] = current[done]
        end_soc[r_done, k_done] = soc[done]
        capped_all[r_done, k_done] = capped[done]
        converged[rows[stuck & ~ended]] = False
        nxt = stage + 1
        has_next = np.zeros(rows.size, dtype=bool)
        inside = nxt < width
        has_next[inside] = s.present[rows[inside], nxt[inside]]
        finished = stuck | (ended & (stop | held | capped | ~has_next))
        moving = ended & ~finished
        if moving.any():
            stage[moving] = nxt[moving]
            warm[moving] = False
            t_stage[moving] = 0.0
            steps[moving] = 0
            acc[:, moving] = 0.0
            fresh = stage_params(rows[moving], stage[moving])
            for array, value in zip((v_set, i_set, exit_v, exit_i, exit_t, held, stop, exit_q),
                                    fresh, strict=True):
                array[moving] = value
        if finished.any():
            keep = ~finished
            rows, cap, r, r_acc, power, eta, gas, vg, b, cells, base, charged = (
                v[keep] for v in (rows, cap, r, r_acc, power, eta, gas, vg, b, cells,
                                  base, charged))
            soc, stage, t_stage, steps = soc[keep], stage[keep], t_stage[keep], steps[keep]
            v_set, i_set, exit_v, exit_i, exit_t, held, stop, exit_q = (
                v[keep] for v in (v_set, i_set, exit_v, exit_i, exit_t, held, stop, exit_q))
            acc = acc[:, keep]
            warm, x_last, xc_last = warm[keep], x_last[keep], xc_last[keep]
            any_gas = bool(np.any(gas > 0))

    if record and series["time_s"]:
        # the final state, so the series covers the whole charge
        series["time_s"].append(t_clock)
        series["stage"].append(series["stage"][-1])
        series["voltage_v"].append(series["voltage_v"][-1])
        series["current_a"].append(0.0)
        series["soc"].append(float(end_soc[0][~np.isnan(end_soc[0])][-1])
                             if np.any(~np.isnan(end_soc[0])) else series["soc"][-1])
    result = SimulationResult(duration, charge, energy, end_current, end_soc, held_all,
                              capped_all, converged)
    if record:
        result.series = {key: np.asarray(values) for key, values in series.items()}
    return result
