"""Physics kernels against the published tables they implement."""

from __future__ import annotations

import numpy as np
import pytest

from chargeplan.physics.electrolyte import (
    freezing_point_tm5_1185,
    specific_gravity_bci,
    specific_gravity_corrected,
    state_of_charge_from_gravity_bci,
)
from chargeplan.physics.ocv import ocv_from_soc, soc_from_ocv
from chargeplan.profiles import load_builtin

# US Army TM 5-1185, Table III: specific gravity -> freezing point (degF)
TM_TABLE = [(1.280, -90), (1.250, -62), (1.200, -16), (1.150, 5), (1.100, 19), (1.000, 32)]
# Battery Council International table (REFERENCES): SoC %, 12 V rested OCV, specific gravity
BCI = [(100, 12.65, 1.265), (75, 12.45, 1.225), (50, 12.24, 1.190), (25, 12.06, 1.155),
       (0, 11.89, 1.120)]


@pytest.mark.parametrize(("gravity", "freeze_f"), TM_TABLE)
def test_freezing_point_tm5_1185_table_iii(gravity, freeze_f):
    assert freezing_point_tm5_1185(gravity) == pytest.approx((freeze_f - 32) / 1.8, abs=1e-9)


def test_freezing_point_is_monotonic_and_vectorised():
    gravities = np.linspace(1.0, 1.3, 61)
    freeze = freezing_point_tm5_1185(gravities)
    assert freeze.shape == gravities.shape
    assert np.all(np.diff(freeze) <= 0)  # stronger acid freezes colder (TM 5-1185 Table III)


@pytest.mark.parametrize(("soc", "ocv_12v", "gravity"), BCI)
def test_bci_gravity_and_rested_voltage(soc, ocv_12v, gravity):
    assert specific_gravity_bci(soc) == pytest.approx(gravity)
    assert state_of_charge_from_gravity_bci(gravity) == pytest.approx(soc)
    # the bundled lead-acid table is the BCI table per cell (6 cells); inverse lookup
    table = load_builtin("flooded").rest_voltage.table
    assert soc_from_ocv(ocv_12v / 6, table) == pytest.approx(soc, abs=0.6)
    assert ocv_from_soc(soc, table) * 6 == pytest.approx(ocv_12v, abs=0.005)


def test_gravity_correction_tm5_4210():
    # US Army TM 5-4210-230-14&P-1: 0.004 per 10 degF from 80 degF
    assert specific_gravity_corrected(1.250, (80 - 32) / 1.8) == pytest.approx(1.250)
    assert specific_gravity_corrected(1.250, (100 - 32) / 1.8) == pytest.approx(1.258)
    assert specific_gravity_corrected(1.250, (30 - 32) / 1.8) == pytest.approx(1.230)
