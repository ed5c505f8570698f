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
