"""Unsteady friction (Brunone form with Vardy's coefficient): more damping, same steady state.

Qualitative check after Bergant, Simpson & Vitkovsky, "Developments in unsteady pipe flow
friction modelling", J. Hydraul. Res. 39(3), 2001 (from memory): quasi-steady friction
under-predicts the decay of the pressure oscillation after a closure; the unsteady term
damps the later peaks without changing the first one much.
"""

import numpy as np
import pytest
from test_moc_elementary import reservoir_pipe_valve

from models.friction import vardy_brown_shear_decay_coefficient
from models.moc import MocModel, Probe
from models.network import ValveMotion


def peaks(k):
    net = reservoir_pipe_valve(ValveMotion.closure(0.1, 0.0), reservoir_head_m=150.0,
                               velocity_m_s=0.5, friction_factor=0.02)
    model = MocModel(net, 0.005, cavitation=False, unsteady_friction=k)
    result = model.run(20.0, [Probe("valve", "P1", 1000.0)])
    excess = result.probe_head("valve") - result.steady.pipe_head_to_m["P1"]
    period = int(round(4.0 / 0.005))
    start = int(round(0.1 / 0.005))
    return [excess[start + j * period: start + (j + 1) * period].max() for j in range(4)], result


def test_unsteady_friction_damps_the_oscillation():
    # at Re ~ 2.5e5 Vardy's k is about 0.005: a small but clear extra decay; a laminar-like
    # k = 0.03 damps much more
    quasi, _ = peaks(None)
    vardy, _ = peaks("vardy")
    strong, _ = peaks(0.03)
    assert vardy[0] == pytest.approx(quasi[0], rel=0.03)
    assert vardy[3] < quasi[3] - 0.3
    assert strong[3] < vardy[3] - 2.0
    assert all(np.diff(vardy) < 0) and all(np.diff(strong) < 0)


def test_vardy_coefficient_is_taken_at_the_initial_reynolds_number():
    _, result = peaks("vardy")
    area = np.pi * 0.25**2
    re = result.steady.pipe_flow_m3_s["P1"] / area * 0.5 / 1.0e-6
    assert 0.003 < vardy_brown_shear_decay_coefficient(re) < 0.01


def test_steady_flow_is_not_changed_by_the_unsteady_term():
    net = reservoir_pipe_valve(ValveMotion.constant(1.0), reservoir_head_m=150.0,
                               friction_factor=0.02)
    result = MocModel(net, 0.005, unsteady_friction=0.05).run(2.0, [Probe("m", "P1", 500.0)])
    assert np.ptp(result.probe_head("m")) < 1e-9
