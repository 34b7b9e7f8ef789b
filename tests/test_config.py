"""Config schema: round trip, overrides, the README reference covers every key."""

import dataclasses
import tomllib
from pathlib import Path

import pytest

from convsim.config import (TABLES, Config, ConfigError, apply_overrides, load_config,
                            parse_config, reference_markdown, to_toml)
from convsim.config import _toml_value

ROOT = Path(__file__).resolve().parent.parent


def test_every_shipped_config_loads():
    for path in (ROOT / "configs").glob("*.toml"):
        if "sweep" in path.stem:
            continue
        load_config(path)


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


@pytest.mark.parametrize("change, message", [
    (dict(physics__rayleigh=-5.0), "physics.rayleigh = -5.0: out of range"),
    (dict(domain__nx=2), "domain.nx = 2: out of range"),
    (dict(numerics__limiter="bogus"), "numerics.limiter = 'bogus': expected one of"),
    (dict(physics__raleigh=1e5), "did you mean 'rayleigh'"),
    (dict(stop__steady="yes"), "stop.steady = 'yes': expected true or false"),
])
def test_replace_validates_like_the_file_reader(tmp_path, change, message):
    """Config.replace and a config file with the same value give the same one-line error."""
    with pytest.raises(ConfigError, match=message.replace("(", r"\(").replace(".", r"\.")) as got:
        Config().replace(**change)
    (key, value), = change.items()
    section, name = key.split("__")
    path = tmp_path / "c.toml"
    path.write_text(f"[{section}]\n{name} = {_toml_value(value)}\n")
    with pytest.raises(ConfigError) as read:
        load_config(path)
    assert str(got.value) == str(read.value)


def test_replace_takes_numpy_numbers_and_whole_tables():
    import numpy as np
    cfg = Config().replace(domain__nx=np.int64(8), physics__rayleigh=np.float64(2e4),
                           stop=Config().stop.__class__(max_steps=7))
    assert cfg.domain.nx == 8 and type(cfg.domain.nx) is int and cfg.stop.max_steps == 7
    assert Config().replace() == Config()


def test_choice_names_are_declared_once():
    """The config offers exactly the names the model implements."""
    from convsim.model import choices, kernels
    from convsim.config import Boundaries, Numerics
    assert set(kernels.LIMITER_CODES) == set(choices.LIMITERS) | {"upwind"}
    meta = {f.name: f.metadata["choices"] for f in dataclasses.fields(Numerics)}
    assert meta["limiter"] is choices.LIMITERS and meta["time_scheme"] is choices.TIME_SCHEMES
    meta = {f.name: f.metadata["choices"] for f in dataclasses.fields(Boundaries)}
    assert meta["top_heat"] is meta["bottom_heat"] is choices.THERMAL_CONDITIONS
