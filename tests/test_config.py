"""Config schema: round trip, overrides, the README reference covers every key."""

import tomllib
from pathlib import Path

import pytest

from convsim.config import (TABLES, Config, ConfigError, apply_overrides, load_config,
                            parse_config, reference_markdown, to_toml)

ROOT = Path(__file__).resolve().parent.parent


def test_every_shipped_config_loads_with_the_values_it_states():
    """Each key a shipped config file sets (read independently with tomllib) arrives in the
    Config unchanged, and the Config survives a TOML round trip."""
    checked = 0
    for path in sorted((ROOT / "configs").glob("*.toml")):
        if "sweep" in path.stem:
            continue
        cfg = load_config(path)
        raw = tomllib.loads(path.read_text())
        for table, values in raw.items():
            if not isinstance(values, dict):
                continue
            section = getattr(cfg, table)
            for key, value in values.items():
                got = getattr(section, key)
                if isinstance(value, list):
                    value = tuple(value)
                if isinstance(value, str) and not isinstance(got, str):
                    continue                          # a quantity string, converted to units
                assert got == value, (path.name, table, key)
                checked += 1
        assert parse_config(tomllib.loads(to_toml(cfg))) == cfg, path.name
    assert checked > 40


def test_toml_round_trip_is_exact():
    cfg = load_config(ROOT / "configs" / "benchmark_case_1c.toml")
    assert parse_config(tomllib.loads(to_toml(cfg))) == cfg


def test_overrides_are_typed_and_validated():
    cfg = parse_config(apply_overrides({}, ["physics.rayleigh=2e5", "boundaries.top_flow=no-slip",
                                            "start.continuation=[1e4, 1e5]"]))
    assert cfg.physics.rayleigh == 2e5 and cfg.boundaries.top_flow == "no-slip"
    assert cfg.start.continuation == (1e4, 1e5)
    with pytest.raises(ConfigError, match="physics.rayleigh"):
        parse_config(apply_overrides({}, ["physics.rayleigh=0"]))


def test_replace_validates_cross_key_rules():
    with pytest.raises(ConfigError, match="top_heat"):
        Config().replace(boundaries__top_heat="flux", boundaries__bottom_heat="flux")


def test_readme_reference_lists_every_key():
    readme = (ROOT / "README.md").read_text()
    assert reference_markdown() in readme
    for name, cls in TABLES.items():
        assert f"### [{name}]" in readme
