"""The charge model against PyBaMM's Doyle-Fuller-Newman model of a published LFP cell.

Reference: PyBaMM (pybamm.lithium_ion.DFN) with its "Prada2013" parameter set (a 2.3 Ah
lithium iron phosphate cell; Prada et al., J. Electrochem. Soc. 2013). Both models run the
same constant-current / constant-voltage charge: C/2 to 3.65 V, then 3.65 V until C/20,
from 10 % state of charge. chargeplan's model takes the cell's capacity, its OCV curve
(from the parameter set's electrode potentials) and its resistance (a 10 s C/2 pulse at
50 %) from the same parameter set, and the bundled LiFePO4 profile's acceptance values.
Total time, charge and the start of constant voltage must agree within 15 %.

Needs the ``reference`` extra (``pip install -e '.[reference]'``); skipped without it.
"""

from __future__ import annotations

import os

import numpy as np
import pytest

os.environ.setdefault("PYBAMM_DISABLE_TELEMETRY", "true")  # never reach the network
pybamm = pytest.importorskip("pybamm", reason="PyBaMM (the 'reference' extra) not installed")

from chargeplan.physics.charge import (  # noqa: E402
    CellParameters,
    StageArrays,
    ocv_grid,
    simulate_charge,
)
from chargeplan.profiles import load_builtin  # noqa: E402

TOLERANCE = 0.15  # the acceptance band


@pytest.fixture(scope="module")
def reference():
    from pybamm.models.full_battery_models.lithium_ion.electrode_soh import (
        get_initial_stoichiometries,
    )

    params = pybamm.ParameterValues("Prada2013")
    params["Upper voltage cut-off [V]"] = 3.7  # room above the 3.65 V hold
    capacity = params["Nominal cell capacity [A.h]"]
    model = pybamm.lithium_ion.DFN()
    experiment = pybamm.Experiment([("Charge at C/2 until 3.65 V", "Hold at 3.65 V until C/20")])
    solution = pybamm.Simulation(model, parameter_values=params,
                                 experiment=experiment).solve(initial_soc=0.1)
    cc, _cv = solution.cycles[0].steps
    hours = solution["Time [h]"].entries
    pulse = pybamm.Simulation(
        model, parameter_values=params,
        experiment=pybamm.Experiment(["Rest for 1 minute", "Charge at C/2 for 10 seconds"]),
    ).solve(initial_soc=0.5)
    volts = pulse["Voltage [V]"].entries
    resistance = (volts[-1] - volts[0]) / (capacity / 2)
    socs = np.linspace(0.0, 1.0, 41)
    u_neg, u_pos = params["Negative electrode OCP [V]"], params["Positive electrode OCP [V]"]
    ocv = []
    for soc in socs:
        x, y = get_initial_stoichiometries(soc, params)
        ocv.append(float(params.evaluate(u_pos(pybamm.Scalar(y)))
                         - params.evaluate(u_neg(pybamm.Scalar(x)))))
    return {
        "capacity_ah": capacity,
        "resistance_ohm": resistance,
        "ocv_table": list(zip(socs * 100, ocv, strict=True)),
        "cv_start_h": float(cc["Time [h]"].entries[-1]),
        "total_h": float(hours[-1] - hours[0]),
        "charge_ah": float(np.trapezoid(-solution["Current [A]"].entries, hours)),
    }


def _ours(ref):
    lfp = load_builtin("lifepo4").physics
    cap = ref["capacity_ah"]

    def one(value):
        return np.array([value], dtype=float)

    params = CellParameters(
        capacity_ah=one(cap), cells=np.array([1]), table_index=np.array([0]),
        tables=ocv_grid(ref["ocv_table"])[None, :],
        ohmic_ohm_ah=one(ref["resistance_ohm"] * cap),
        acceptance_ohm_ah=one(lfp.acceptance_resistance.value),
        resistance_doubling_k=one(lfp.resistance_doubling.value),
        coulombic_efficiency=one(lfp.coulombic_efficiency.value),
        gas_a_per_ah=one(0.0), gas_voltage_v=one(0.0), gas_slope_v=one(1.0),
        gas_doubling_k=one(10.0), temperature_c=one(25.0), soc_start=one(0.1),
    )
    stages = StageArrays(
        present=np.array([[True, True]]),
        voltage_v_cell=np.array([[3.65, 3.65]]),
        current_a=np.array([[cap / 2, cap / 2]]),
        exit_voltage_v_cell=np.array([[3.65, np.nan]]),
        exit_current_a=np.array([[np.nan, cap / 20]]),
        exit_duration_s=np.array([[np.inf, np.inf]]),
        stop_after=np.array([[False, True]]),
    )
    return simulate_charge(params, stages)


def test_cccv_charge_matches_pybamm_dfn_prada2013(reference):
    ours = _ours(reference)
    assert ours.converged[0]
    cv_start_h = ours.duration_s[0, 0] / 3600
    total_h = ours.duration_s[0].sum() / 3600
    charge_ah = ours.charge_ah[0].sum()
    assert cv_start_h == pytest.approx(reference["cv_start_h"], rel=TOLERANCE)
    assert total_h == pytest.approx(reference["total_h"], rel=TOLERANCE)
    assert charge_ah == pytest.approx(reference["charge_ah"], rel=TOLERANCE)
