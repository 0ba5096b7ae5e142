"""Sizing a suspected burst from its first pressure drop.

The check is against the MOC engine with a burst of known effective area in a pipe's run
(the engine's junction and orifice relations are themselves checked against the standard
junction relation and Joukowsky's head rise): dH = B Q_b / 2 at the tee of the pipe and the
opening (Wylie & Streeter, Fluid Transients in Systems, 1993, ch. 3; from memory).
"""

import types

import numpy as np
import pytest

from detectors.burst import burst_size_from_drop
from models.layout import NodeSite, PipeSite, SensorSite, SystemLayout
from models.moc import MocModel, Probe
from models.network import Burst, Fluid, Network, Pipe, Reservoir, Valve, ValveMotion
from models.network_edit import split_pipe
from service.flags import burst_size_text

G = 9.80665
FLUID = Fluid(1000.0, 1e-6, -10.0, G)


def burst_in_a_main(area_m2: float, opening_s: float):
    """A 3 km main between two heads with a burst half-way; the head 200 m past it."""
    pipe = Pipe("P", "R", "V", 3000.0, 0.4, 1100.0, roughness_m=1e-4)
    net = Network(FLUID, (pipe,), (Reservoir("R", 80.0), Valve("V", 0.02, ValveMotion.constant(1.0), outlet_head_m=20.0)))
    net = split_pipe(net, "P", 1500.0, Burst("B", area_m2, start_time_s=1.0, opening_time_s=opening_s))
    model = MocModel(net, 0.005, cavitation=False)
    result = model.run(1.8, [Probe("s", "P/b", 200.0)])
    t, head = result.times_s, result.probe_head("s")
    after = (t > 1.6) & (t < 1.7)  # past the front (1.18 s), before any reflection returns
    drop_pa = (head[t < 1.0].mean() - head[after].mean()) * 1000.0 * G
    return drop_pa, head[after].mean() * 1000.0 * G, result.node_outflow("B")[after].mean(), \
        model.discretisation.wave_speed_m_s["P/b"], pipe.area_m2


@pytest.mark.parametrize("area_m2", [0.002, 0.005])
def test_a_sudden_burst_is_sized_from_its_first_drop(area_m2):
    drop, pressure_after, flow, wave_speed, pipe_area = burst_in_a_main(area_m2, 0.0)
    size = burst_size_from_drop(drop, pressure_after, wave_speed, pipe_area, 1000.0)
    assert size.flow_m3_s == pytest.approx(flow, rel=0.05)
    assert size.effective_area_m2 == pytest.approx(area_m2, rel=0.12)


def test_a_slow_opening_is_sized_low_not_high():
    drop_fast, *_ = burst_in_a_main(0.002, 0.0)
    drop_slow, pressure_after, flow, wave_speed, pipe_area = burst_in_a_main(0.002, 0.5)
    assert drop_slow < drop_fast
    assert burst_size_from_drop(drop_slow, pressure_after, wave_speed, pipe_area, 1000.0).flow_m3_s <= flow * 1.01


def test_bad_inputs_are_refused_and_an_unknown_head_gives_no_area():
    with pytest.raises(ValueError, match="drop_pa"):
        burst_size_from_drop(0.0, 1e5, 1000.0, 0.1, 1000.0)
    assert np.isnan(burst_size_from_drop(1e5, float("nan"), 1000.0, 0.1, 1000.0).effective_area_m2)


def test_the_flag_sentence_uses_the_first_sensor_and_the_opening_elevation():
    layout = SystemLayout("s", nodes=(NodeSite("R", "reservoir", 0.0), NodeSite("V", "valve", 0.0)),
                          pipes=(PipeSite("P", "R", "V", 3000.0, 0.4, 1100.0, 1.6e6, -20e3),),
                          sensors=(SensorSite("S", "P", 1700.0, elevation_m=10.0),))
    observation = types.SimpleNamespace(sensor_id="S", first_front_pa=-200e3, baseline_pa=500e3)
    event = types.SimpleNamespace(origin_sensor="S", observations=[observation])
    text = burst_size_text(event, layout, 1000.0, opening_elevation_m=0.0)
    expected = burst_size_from_drop(200e3, 300e3 + 1000.0 * G * 10.0, 1100.0, np.pi * 0.04, 1000.0)
    assert f"about {expected.flow_m3_s * 1e3:.0f} l/s" in text
    assert f"{expected.effective_area_m2 * 1e4:.0f} cm2" in text
    assert "cm2" not in burst_size_text(event, layout, 1000.0)  # no located opening: flow only
