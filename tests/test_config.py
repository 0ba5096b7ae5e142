"""Configuration loading: the shipped demo loads; every error names the file and the key."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from service.config import ConfigError, load_config, system_layout

REPO = Path(__file__).resolve().parents[1]


@pytest.fixture()
def config_copy(tmp_path: Path) -> Path:
    target = tmp_path / "config"
    shutil.copytree(REPO / "config", target)
    return target


def _edit(path: Path, old: str, new: str) -> None:
    text = path.read_text()
    assert old in text, f"fixture text {old!r} not in {path.name}"
    path.write_text(text.replace(old, new, 1))


class TestShippedConfig:
    def test_demo_loads_with_sensors_and_pipes(self):
        config = load_config(REPO / "config")
        system = config.system("kestrel-hill")
        assert len([s for s in system.sensors if s.quantity == "pressure"]) >= 4
        assert config.inbox_path == REPO / "sample_logs"
        assert config.database_url == "sqlite:///" + str(REPO / "surgesift.sqlite")

    def test_layout_in_si_with_prior_wave_speeds(self):
        system = load_config(REPO / "config").system("kestrel-hill")
        layout = system_layout(system)
        pipe = layout.pipe("KH-1")
        assert pipe.allowable_pressure_pa == pytest.approx(1600e3)
        assert pipe.wave_speed_m_s == pytest.approx(1120.0)  # the configured prior
        # TB-1 has no prior: the theoretical Korteweg value for PVC lies in the usual
        # 300-500 m/s band of PVC mains (common practice).
        assert 300.0 < layout.pipe("TB-1").wave_speed_m_s < 500.0
        # KH2-PT3 logs in bar: its 25 bar range is 2.5 MPa.
        assert layout.sensor("KH2-PT3").range_max_pa == pytest.approx(2.5e6)

    def test_calibrated_speed_overrides_prior(self):
        system = load_config(REPO / "config").system("kestrel-hill")
        layout = system_layout(system, {"KH-1": 1050.0})
        assert layout.pipe("KH-1").wave_speed_m_s == 1050.0


class TestConfigErrors:
    def test_unknown_key_names_file_and_key(self, config_copy):
        _edit(config_copy / "systems" / "kestrel-hill.toml", "length_m = 2400.0", "lenght_m = 2400.0")
        with pytest.raises(ConfigError) as info:
            load_config(config_copy)
        text = str(info.value)
        assert "systems/kestrel-hill.toml: pipes[0: KH-1].lenght_m: unknown key" in text
        assert "pipes[0: KH-1].length_m: required key is missing" in text

    def test_negative_length_says_what_is_expected(self, config_copy):
        _edit(config_copy / "systems" / "kestrel-hill.toml", "length_m = 2100.0", "length_m = -5.0")
        with pytest.raises(ConfigError, match=r"pipes\[1: KH-2\]\.length_m: Input should be greater than 0 \(got -5\.0\)"):
            load_config(config_copy)

    def test_local_loss_on_a_node_that_is_not_a_junction_is_refused(self, config_copy):
        _edit(config_copy / "systems" / "kestrel-hill.toml", "head_m = 97.0", "head_m = 97.0\nlocal_loss_coefficient = 0.5")
        with pytest.raises(ConfigError, match=r"a reservoir node does not take it"):
            load_config(config_copy)

    def test_local_loss_of_a_junction_reaches_the_model(self, config_copy):
        from service.model_builder import build_network

        _edit(config_copy / "systems" / "kestrel-hill.toml", "elevation_m = 41.0", "elevation_m = 41.0\nlocal_loss_coefficient = 0.8")
        system = load_config(config_copy).systems["kestrel-hill"]
        (junction,) = [n for n in build_network(system).nodes if type(n).__name__ == "Junction"]
        assert junction.loss_coefficient == 0.8

    def test_sensor_beyond_pipe_end(self, config_copy):
        _edit(config_copy / "systems" / "kestrel-hill.toml", "offset_m = 1650.0", "offset_m = 2650.0")
        with pytest.raises(ConfigError, match=r"sensors\[KH1-PT2\]\.offset_m: 2650.0 m is beyond the end of pipe KH-1"):
            load_config(config_copy)

    def test_unknown_node_reference(self, config_copy):
        _edit(config_copy / "systems" / "kestrel-hill.toml", 'to_node = "KESTREL_SR"', 'to_node = "KESTREL_XX"')
        with pytest.raises(ConfigError, match=r"pipes\[KH-2\]\.to_node: no node 'KESTREL_XX'"):
            load_config(config_copy)

    def test_bad_unit_for_quantity(self, config_copy):
        _edit(config_copy / "systems" / "kestrel-hill.toml", 'unit = "l/s"', 'unit = "kPa"')
        with pytest.raises(ConfigError, match=r"sensors\[5: BRK-SCADA-Q\]: unit 'kPa' does not fit quantity 'flow'"):
            load_config(config_copy)

    def test_bad_time_zone(self, config_copy):
        _edit(config_copy / "systems" / "kestrel-hill.toml", 'timezone = "Europe/London"', 'timezone = "Europe/Londn"')
        with pytest.raises(ConfigError, match=r"sensors\[BRK-SCADA-P\]\.timezone: unknown time zone 'Europe/Londn'"):
            load_config(config_copy)

    def test_model_steps_per_sample_is_read_and_checked(self, config_copy):
        assert load_config(config_copy).service.comparison.model_steps_per_sample == 4
        _edit(config_copy / "service.toml", "model_steps_per_sample = 4", "model_steps_per_sample = 0")
        with pytest.raises(ConfigError, match=r"comparison.model_steps_per_sample: Input should be "
                                              r"greater than or equal to 1"):
            load_config(config_copy)

    def test_bad_cron(self, config_copy):
        _edit(config_copy / "service.toml", 'cron = "30 2 * * *"', 'cron = "30 2 * *"')
        with pytest.raises(ConfigError, match=r"service.toml: schedule.cron: expected five fields"):
            load_config(config_copy)

    def test_unknown_material(self, config_copy):
        _edit(config_copy / "systems" / "kestrel-hill.toml", 'material = "pvc"', 'material = "unobtainium"')
        with pytest.raises(ConfigError, match=r"pipes\[TB-1\]\.material: unknown material 'unobtainium'"):
            load_config(config_copy)

    def test_sensor_ids_unique_across_systems(self, config_copy):
        original = (config_copy / "systems" / "kestrel-hill.toml").read_text()
        (config_copy / "systems" / "copy.toml").write_text(original.replace('id = "kestrel-hill"', 'id = "other"', 1))
        with pytest.raises(ConfigError, match=r"sensor ids must be unique across systems"):
            load_config(config_copy)

    def test_broken_toml(self, config_copy):
        (config_copy / "systems" / "kestrel-hill.toml").write_text("id = \n")
        with pytest.raises(ConfigError, match=r"kestrel-hill.toml: not valid TOML"):
            load_config(config_copy)

    def test_missing_folder(self, tmp_path):
        with pytest.raises(ConfigError, match="no such configuration folder"):
            load_config(tmp_path / "nowhere")
