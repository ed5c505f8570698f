"""The charge model against PyBaMM's Doyle-Fuller-Newman model of a published LFP cell.

Reference: PyBaMM (pybamm.lithium_ion.DFN) with its "Prada2013" parameter set (a 2.3 Ah
lithium iron phosphate cell; Prada et al., J. Electrochem. Soc. 2013). Both models run the
same constant-current / constant-voltage charge from 10 % state of charge: the issue's
C/2 to 3.65 V with a C/20 cut-off, and two with a real constant-voltage taper (1 C to
3.6 V until C/50; 2 C to 3.6 V until C/20). chargeplan's model takes everything from the
same parameter set: the capacity, the OCV curve (from the electrode potentials), and its
two resistances from 10 s C/2 pulses at 50 % and 90 % (R(soc) = R_ohm + R_acc (soc +
0.05) / (1 - soc)). Total time, charge and the start of constant voltage must agree
within 15 %.

The model's form is validated here with the reference cell's own parameters, not the
shipped LiFePO4 values (those are calibrated for energy cells, BU-409, and checked in
tests/test_charge_model.py).

Lead-acid has no such reference. Attempted with PyBaMM 26.10.1.1's lead-acid models and
their published "Sulzer2019" parameter set (a 17 Ah, 6-cell battery; Sulzer et al., J.
Electrochem. Soc. 2019), on 2026-12-03:

- ``pybamm.lead_acid.LOQS()`` and ``Full()`` with the set as shipped raise
  ``KeyError: Parameter 'Positive electrode OCP [V]' not found`` (the set names it
  "Positive electrode open-circuit potential [V]"); ``solve(initial_soc=0.5)`` raises
  ``AttributeError: 'DomainLeadAcidParameters' object has no attribute 'Q_init'``.
- With both OCP names aliased and "Initial State of Charge" 0.5: a constant C/10 charge
  (1.7 A) for 10 h, twice the charge missing, ends at 14.13 V (LOQS) or 14.15 V (Full),
  never reaching the 14.4 V (2.40 V/cell) absorption voltage; the model has no end-of-charge
  rise (no gassing or oxygen-cycle side reaction by default).
- ``Experiment(["Charge at 1.7 A until 2.4 V", "Hold at 2.4 V until 0.34 A"])`` skips the
  constant-current step as "infeasible at initial conditions"; the hold alone starts at
  720 A (LOQS) or 134 A (Full) and takes 21.3 Ah in for the 8.5 Ah missing.

So no constant-current then constant-voltage charge of that set can be compared with the
lead-acid model; it is checked against published practice instead
(tests/test_lead_acid_model.py).

Needs the ``reference`` extra (``pip install -e '.[reference]'``); skipped without it.
"""

from __future__ import annotations

import os

import numpy as np
import pytest

os.environ.setdefault("PYBAMM_DISABLE_TELEMETRY", "true")  # never reach the network
pybamm = pytest.importorskip("pybamm", reason="PyBaMM (the 'reference' extra) not installed")

from chargeplan.physics.charge import (  # noqa: E402
    SHEPHERD_OFFSET,
    CellParameters,
    StageArrays,
    ocv_grid,
    simulate_charge,
)

TOLERANCE = 0.15  # the acceptance band
CASES = [(0.5, 3.65, 20), (1.0, 3.6, 50), (2.0, 3.6, 20)]  # C-rate, hold voltage, C/n cut-off


@pytest.fixture(scope="module")
def cell():
    from pybamm.models.full_battery_models.lithium_ion.electrode_soh import (
        get_initial_stoichiometries,
    )

    params = pybamm.ParameterValues("Prada2013")
    params["Upper voltage cut-off [V]"] = 3.7  # room above the 3.65 V hold
    capacity = params["Nominal cell capacity [A.h]"]
    model = pybamm.lithium_ion.DFN()

    def pulse(soc: float) -> float:
        run = pybamm.Simulation(
            model, parameter_values=params,
            experiment=pybamm.Experiment(["Rest for 1 minute", "Charge at C/2 for 10 seconds"]),
        ).solve(initial_soc=soc)
        volts = run["Voltage [V]"].entries
        return float((volts[-1] - volts[0]) / (capacity / 2))

    def shape(soc: float) -> float:
        return (soc + SHEPHERD_OFFSET) / (1 - soc)

    r50, r90 = pulse(0.5), pulse(0.9)
    r_acc = (r90 - r50) / (shape(0.9) - shape(0.5))
    r_ohm = r50 - r_acc * shape(0.5)
    socs = np.linspace(0.0, 1.0, 41)
    u_neg, u_pos = params["Negative electrode OCP [V]"], params["Positive electrode OCP [V]"]
    ocv = []
    for soc in socs:
        x, y = get_initial_stoichiometries(soc, params)
        ocv.append(float(params.evaluate(u_pos(pybamm.Scalar(y)))
                         - params.evaluate(u_neg(pybamm.Scalar(x)))))
    return {"params": params, "model": model, "capacity_ah": capacity,
            "ohmic_ohm_ah": r_ohm * capacity, "acceptance_ohm_ah": r_acc * capacity,
            "ocv_table": list(zip(socs * 100, ocv, strict=True))}


def _pybamm(cell, rate, volts, cut):
    experiment = pybamm.Experiment(
        [(f"Charge at {rate}C until {volts} V", f"Hold at {volts} V until C/{cut}")])
    solution = pybamm.Simulation(cell["model"], parameter_values=cell["params"],
                                 experiment=experiment).solve(initial_soc=0.1)
    hours = solution["Time [h]"].entries
    return (float(solution.cycles[0].steps[0]["Time [h]"].entries[-1]),
            float(hours[-1] - hours[0]),
            float(np.trapezoid(-solution["Current [A]"].entries, hours)))


def _ours(cell, rate, volts, cut):
    cap = cell["capacity_ah"]

    def one(value):
        return np.array([value], dtype=float)

    params = CellParameters(
        capacity_ah=one(cap), cells=np.array([1]), table_index=np.array([0]),
        tables=ocv_grid(cell["ocv_table"])[None, :],
        ohmic_ohm_ah=one(cell["ohmic_ohm_ah"]), acceptance_ohm_ah=one(cell["acceptance_ohm_ah"]),
        resistance_doubling_k=one(25.0), coulombic_efficiency=one(0.99),
        gas_a_per_ah=one(0.0), gas_voltage_v=one(0.0), gas_slope_v=one(1.0),
        gas_doubling_k=one(10.0), temperature_c=one(25.0), soc_start=one(0.1),
    )
    stages = StageArrays(
        present=np.array([[True, True]]),
        voltage_v_cell=np.array([[volts, volts]]),
        current_a=np.array([[cap * rate, cap * rate]]),
        exit_voltage_v_cell=np.array([[volts, np.nan]]),
        exit_current_a=np.array([[np.nan, cap / cut]]),
        exit_duration_s=np.array([[np.inf, np.inf]]),
        stop_after=np.array([[False, True]]),
    )
    result = simulate_charge(params, stages)
    assert result.converged[0]
    return (result.duration_s[0, 0] / 3600, result.duration_s[0].sum() / 3600,
            float(result.charge_ah[0].sum()))


@pytest.mark.parametrize(("rate", "volts", "cut"), CASES,
                         ids=[f"{r}C-{v}V-C/{c}" for r, v, c in CASES])
def test_cccv_charge_matches_pybamm_dfn_prada2013(cell, rate, volts, cut):
    cv_start, total, charge = _ours(cell, rate, volts, cut)
    ref_cv_start, ref_total, ref_charge = _pybamm(cell, rate, volts, cut)
    assert cv_start == pytest.approx(ref_cv_start, rel=TOLERANCE)
    assert total == pytest.approx(ref_total, rel=TOLERANCE)
    assert charge == pytest.approx(ref_charge, rel=TOLERANCE)
    assert total - cv_start >= 0  # both models end in constant voltage


# --- the shipped NMC values against a published cell of the size they describe ---------
#: A generic energy-cell profile against one published cell: within a fifth (measured on
#: 2026-12-03: constant voltage begins within 8 %, total time 10-14 % longer, charge 5 % less).
SHIPPED_TOLERANCE = 0.20
NMC_CASES = [(1.0, 33), (0.5, 33)]  # C-rate, C/n cut-off (the profile's 3 % tail, BU-409)


@pytest.fixture(scope="module")
def chen2020():
    """PyBaMM's "Chen2020" set: a 5 Ah cylindrical 21700 NMC811/graphite-silicon energy
    cell (Chen et al., J. Electrochem. Soc. 167, 2020), the size and kind the bundled
    NMC profile describes."""
    params = pybamm.ParameterValues("Chen2020")
    params["Upper voltage cut-off [V]"] = 4.25  # room above the 4.2 V hold
    return params


def _shipped_nmc(rate: float, cut: int) -> tuple[float, float, float]:
    from chargeplan.estimate import arrays_for

    from .conftest import battery, plan_of

    plan = plan_of(battery(battery={"chemistry": "nmc", "nominal_voltage": None,
                                    "cells_in_series": 1, "capacity": "5 Ah"},
                           state={"state_of_charge": "5 %"}))
    params, _ = arrays_for([plan])  # the bundled profile's OCV table and resistances
    volts, cap = 4.2, 5.0
    stages = StageArrays(
        present=np.array([[True, True]]), voltage_v_cell=np.array([[volts, volts]]),
        current_a=np.array([[cap * rate, cap * rate]]),
        exit_voltage_v_cell=np.array([[volts, np.nan]]),
        exit_current_a=np.array([[np.nan, cap / cut]]),
        exit_duration_s=np.array([[np.inf, np.inf]]), stop_after=np.array([[False, True]]))
    result = simulate_charge(params, stages)
    assert result.converged[0]
    return (result.duration_s[0, 0] / 3600, result.duration_s[0].sum() / 3600,
            float(result.charge_ah[0].sum()))


@pytest.mark.parametrize(("rate", "cut"), NMC_CASES, ids=[f"{r}C-C/{c}" for r, c in NMC_CASES])
def test_shipped_nmc_values_match_a_published_5_ah_cell(chen2020, rate, cut):
    """The bundled NMC profile's own resistances and OCV (not fitted here) give a 1 C and a
    0.5 C charge to 4.2 V/cell close to PyBaMM's DFN model of the Chen2020 cell, from 5 %:
    the start of constant voltage, the total time and the charge put in."""
    experiment = pybamm.Experiment(
        [(f"Charge at {rate}C until 4.2 V", f"Hold at 4.2 V until C/{cut}")])
    solution = pybamm.Simulation(pybamm.lithium_ion.DFN(), parameter_values=chen2020,
                                 experiment=experiment).solve(initial_soc=0.05)
    hours = solution["Time [h]"].entries
    ref = (float(solution.cycles[0].steps[0]["Time [h]"].entries[-1] - hours[0]),
           float(hours[-1] - hours[0]),
           float(np.trapezoid(-solution["Current [A]"].entries, hours)))
    ours = _shipped_nmc(rate, cut)
    for name, mine, theirs in zip(("constant voltage begins", "total", "charge"), ours, ref,
                                  strict=True):
        assert mine == pytest.approx(theirs, rel=SHIPPED_TOLERANCE), (name, ours, ref)
