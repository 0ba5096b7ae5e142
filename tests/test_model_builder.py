"""Builder from a system config to the MOC network; pipe splitting; scenario outputs."""

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from models.moc import MocModel, Probe
from models.network import Fluid, HeadSeries, Junction, Network, Pipe, PumpStation, Reservoir
from models.network_edit import cut_at_point, point_after_split, split_pipe
from service.config import load_system_file
from service.model_builder import (build_network, build_replay, build_scenario,
                                   water_kinematic_viscosity_m2_s)
from service.simulate import run_scenario

SYSTEM_FILE = Path(__file__).resolve().parents[1] / "config" / "systems" / "kestrel-hill.toml"


@pytest.fixture(scope="module")
def system():
    loaded, problems = load_system_file(SYSTEM_FILE)
    assert not problems
    return loaded


def test_network_mirrors_the_config(system):
    network = build_network(system)
    assert {p.id for p in network.pipes} == {p.id for p in system.pipes}
    assert any(isinstance(n, PumpStation) and n.units_running == 2 for n in network.nodes)
    # vapour head at ~11 C: (1.31 kPa - 101.325 kPa)/(rho g) ~ -10.2 m (iapws-based
    # properties module; standard atmosphere, common practice)
    assert network.fluid.vapour_head_m == pytest.approx(-10.2, abs=0.05)


def test_viscosity_of_water_at_20_c():
    # handbook value 1.0034e-6 m^2/s at 20 C (IAPWS 2008 viscosity, from memory): 1 %
    assert water_kinematic_viscosity_m2_s(20.0) == pytest.approx(1.0034e-6, rel=0.01)


def test_every_configured_scenario_builds(system):
    for scenario in system.scenarios:
        built = build_scenario(system, scenario.name)
        assert built.model.discretisation.largest_adjustment <= 0.01
        assert built.probes


def test_run_scenario_writes_traces_envelope_and_plot(system, tmp_path):
    paths = run_scenario(system, system.scenarios[0].name, tmp_path)
    traces = pd.read_parquet(paths["traces"])
    envelope = pd.read_csv(paths["envelope"])
    assert traces["time_s"].iloc[-1] == pytest.approx(system.scenarios[0].duration_s, abs=0.01)
    assert set(envelope["pipe_id"]) == {p.id for p in system.pipes}
    assert (envelope["max_kpa"] >= envelope["min_kpa"]).all()
    assert paths["plot"].stat().st_size > 10_000


FLUID = Fluid(1000.0, 1e-6, -10.0)


def two_reservoirs():
    pipe = Pipe("P", "A", "B", 1000.0, 0.3, 1000.0, roughness_m=1e-4,
                profile_offsets_m=(300.0, 700.0), profile_elevations_m=(20.0, 5.0))
    return Network(FLUID, (pipe,), (Reservoir("A", 50.0, 10.0), Reservoir("B", 40.0, 0.0)))


class TestSplitPipe:
    def test_split_keeps_the_hydraulics(self):
        # the same pipe cut in two with a plain junction carries the same steady flow
        net = two_reservoirs()
        split = split_pipe(net, "P", 400.0, Junction("X"))
        a = MocModel(net, 0.01).steady_state().pipe_flow_m3_s["P"]
        b = MocModel(split, 0.01).steady_state().pipe_flow_m3_s
        assert b["P/a"] == pytest.approx(a, rel=1e-9) and b["P/b"] == pytest.approx(a, rel=1e-9)
        assert split.node("X").elevation_m == pytest.approx(20.0 - 15.0 * 100.0 / 400.0)
        assert split.pipe("P/b").profile_offsets_m == (300.0,)

    def test_points_move_onto_the_parts(self):
        assert point_after_split("P", 650.0, "P", 400.0) == ("P/b", 250.0)
        assert point_after_split("P", 100.0, "P", 400.0) == ("P/a", 100.0)
        assert point_after_split("Q", 100.0, "P", 400.0) == ("Q", 100.0)

    def test_split_at_the_end_is_refused(self):
        with pytest.raises(ValueError, match="strictly inside"):
            split_pipe(two_reservoirs(), "P", 1000.0, Junction("X"))


def test_measured_head_drives_the_kept_side():
    net = two_reservoirs()
    times = np.array([0.0, 1.0, 1.01, 5.0])
    heads = np.array([45.0, 45.0, 50.0, 50.0])
    cut = cut_at_point(net, "P", 500.0, HeadSeries("M", times, heads), keep="downstream")
    assert {p.id for p in cut.pipes} == {"P/b"} and {n.id for n in cut.nodes} == {"M", "B"}
    result = MocModel(cut, 0.005).run(2.0, [Probe("m", "P/b", 0.0)])
    assert result.probe_head("m")[0] == pytest.approx(45.0)
    assert result.probe_head("m")[-1] == pytest.approx(50.0)


def test_replay_model_from_config(system):
    sensor = system.sensors[0]
    times = np.arange(0.0, 10.0, 0.01)
    model, probes = build_replay(system, sensor.id, times, np.full(times.size, 100.0))
    result = model.run(2.0, probes)
    assert result.probe_heads_m.shape[1] == len(probes)
    assert np.all(np.isfinite(result.probe_heads_m))


def test_scenario_runs_with_calibrated_wave_speeds():
    """A calibration replaces the configured speed (split pipes take their parent's)."""
    from pathlib import Path

    from service.config import load_config
    from service.model_builder import build_scenario
    from service.simulate import _with_wave_speeds

    system = load_config(Path(__file__).resolve().parents[1] / "config").system("kestrel-hill")
    scenario = _with_wave_speeds(build_scenario(system, "kh2-burst"), {"KH-1": 1000.0, "KH-2": 1050.0})
    speeds = scenario.model.discretisation.wave_speed_m_s
    assert speeds["KH-1"] == pytest.approx(1000.0, rel=0.01)  # within the 1 % reach fit
    assert all(v == pytest.approx(1050.0, rel=0.01) for k, v in speeds.items() if k.startswith("KH-2"))


def test_an_air_vessel_in_the_config_guards_the_pump_trip_scenario(tmp_path):
    text = SYSTEM_FILE.read_text()
    assert 'from_node = "BROOKFOLD_PS"' in text
    guarded = text.replace('from_node = "BROOKFOLD_PS"', 'from_node = "BROOKFOLD_AV"', 1) + """
[[nodes]]
id = "BROOKFOLD_AV"
kind = "air_vessel"
name = "Brookfold surge vessel"
elevation_m = 12.0
[nodes.vessel]
gas_volume_m3 = 4.0
vessel_volume_m3 = 10.0
inflow_loss_s2_m5 = 500.0

[[pipes]]
id = "BF-0"
from_node = "BROOKFOLD_PS"
to_node = "BROOKFOLD_AV"
length_m = 22.4
diameter_m = 0.45
wall_thickness_m = 0.0086
material = "ductile_iron"
wave_speed_m_s = 1120.0
allowable_pressure_kpa = 1600.0
minimum_pressure_kpa = -20.0
"""
    path = tmp_path / "kestrel-hill.toml"
    path.write_text(guarded)
    with_vessel, problems = load_system_file(path)
    assert not problems, problems
    bare, _ = load_system_file(SYSTEM_FILE)
    runs = {}
    for label, system in (("bare", bare), ("vessel", with_vessel)):
        paths = run_scenario(system, "full-pump-trip", tmp_path / label)
        runs[label] = (pd.read_csv(paths["envelope"]), pd.read_parquet(paths["traces"]), paths["warnings"])
    lowest = {label: env.loc[env["pipe_id"] == "KH-1", "min_kpa"].min() for label, (env, _, _) in runs.items()}
    assert lowest["vessel"] > lowest["bare"] + 100.0  # the vessel lifts the downsurge along the main
    gas = runs["vessel"][1]["BROOKFOLD_AV_gas_m3"]
    assert gas.iloc[0] == pytest.approx(4.0) and gas.max() > 4.0 and runs["vessel"][2] == []


def test_an_air_valve_in_the_config_reaches_the_model_and_the_traces(tmp_path):
    # the junction chamber of the demo system fitted with an air valve instead
    text = SYSTEM_FILE.read_text()
    old = 'kind = "junction"\nname = "Kestrel Hill junction chamber"\nelevation_m = 41.0\n'
    assert old in text
    path = tmp_path / "kestrel-hill.toml"
    path.write_text(text.replace(old, old.replace('"junction"', '"air_valve"')
                                 + "[nodes.air_valve]\ninlet_area_m2 = 0.004\noutlet_area_m2 = 0.0002\n"))
    system, problems = load_system_file(path)
    assert not problems, problems
    (valve,) = [n for n in build_network(system).nodes if type(n).__name__ == "AirValve"]
    assert (valve.inlet_area_m2, valve.outlet_area_m2, valve.elevation_m) == (0.004, 0.0002, 41.0)
    paths = run_scenario(system, "full-pump-trip", tmp_path)
    air = pd.read_parquet(paths["traces"])["KESTREL_JCT_air_m3"]
    assert air.iloc[0] == 0.0 and (air >= 0.0).all()


def _one_pipe_system(**pipe):
    from service.config_schema import SystemConfig

    return SystemConfig.model_validate(dict(
        id="restraint-check", water_temperature_c=15.0,
        nodes=[dict(id="R1", kind="reservoir", head_m=50.0), dict(id="V1", kind="valve",
               valve=dict(effective_area_m2=0.01))],
        pipes=[dict(id="P1", from_node="R1", to_node="V1", length_m=1000.0, diameter_m=0.45,
                    wall_thickness_m=0.022, material="pvc", allowable_pressure_kpa=1000.0, **pipe)],
        sensors=[dict(id="S1", pipe="P1", offset_m=500.0)],
    ))


def test_model_wave_speed_follows_the_configured_restraint():
    """A pipe without a prior gets the Korteweg speed of its own restraint in the MOC model,
    as in the detectors' layout (a model on another restraint ran 9 % fast for this PVC pipe).

    Thick wall (D/e = 20.5): c1 = (2e/D)(1 + nu) + D/(D + e) X with X = 1 for expansion
    joints throughout and X = 1 - nu^2 when anchored throughout; a = sqrt((K/rho) /
    (1 + c1 K D / (E e))) (Wylie & Streeter, Fluid Transients in Systems, 1993, sec. 2.2,
    from memory). E = 3.0 GPa, nu = 0.45: the project's PVC entry (typical values, from memory).
    """
    from models.water import bulk_modulus_pa, water_density_kg_m3
    from service.config import system_layout

    d, e, modulus, nu = 0.45, 0.022, 3.0e9, 0.45
    k, rho = bulk_modulus_pa(15.0), water_density_kg_m3(15.0)

    def korteweg(x):
        c1 = 2 * e / d * (1 + nu) + d / (d + e) * x
        return np.sqrt((k / rho) / (1 + c1 * k * d / (modulus * e)))

    joints = _one_pipe_system(restraint="expansion_joints")
    anchored = _one_pipe_system(restraint="fully_anchored")
    speed_joints = build_network(joints).pipe("P1").wave_speed_m_s
    speed_anchored = build_network(anchored).pipe("P1").wave_speed_m_s
    assert speed_joints == pytest.approx(korteweg(1.0), rel=1e-6)
    assert speed_anchored == pytest.approx(korteweg(1 - nu**2), rel=1e-6)
    assert speed_anchored / speed_joints > 1.05
    # the model and the detectors' layout agree on the pipe
    assert system_layout(joints).pipe("P1").wave_speed_m_s == pytest.approx(speed_joints, rel=1e-12)


def test_configured_prior_wave_speed_wins_over_the_material():
    system = _one_pipe_system(restraint="expansion_joints", wave_speed_m_s=410.0)
    assert build_network(system).pipe("P1").wave_speed_m_s == 410.0
