"""Shared fixtures: paths to the example configs and a simulated rig on a virtual clock."""

from __future__ import annotations

from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
CONFIGS = ROOT / "configs"
DEMO_RIG = CONFIGS / "rigs" / "demo-sim.toml"
FID_SUDDEN = CONFIGS / "sequences" / "fid-sudden.toml"
FID_ADIABATIC = CONFIGS / "sequences" / "fid-adiabatic-pulse.toml"

# 2026-06-21 12:00 UTC: the simulator's diurnal swing is at its peak, so the field is steady.
EPOCH_NOON_UTC = 1_782_043_200.0


@pytest.fixture
def demo_rig_path() -> Path:
    return DEMO_RIG


@pytest.fixture
def write_toml(tmp_path: Path):
    """Write a TOML text to a file in tmp_path and return its path."""

    def _write(name: str, text: str) -> Path:
        path = tmp_path / name
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text)
        return path

    return _write


def quiet_rig(loaded, **simulator_changes):
    """The demo rig with interference switched off (or changed), for estimator tests."""
    import dataclasses

    quiet = dict(mains_amplitude_uv=0.0, spike_rate_per_s=0.0, ringing_amplitude_v=0.0)
    quiet.update(simulator_changes)
    sim = dataclasses.replace(loaded.config.simulator, **quiet)
    return dataclasses.replace(loaded, config=dataclasses.replace(loaded.config, simulator=sim))


@pytest.fixture(autouse=True, scope="session")
def _private_latch_dir(tmp_path_factory: pytest.TempPathFactory):
    """Trip latches written by tests go to a temporary folder, never the user's state folder."""
    import os

    old = os.environ.get("PRECESS_STATE_DIR")
    os.environ["PRECESS_STATE_DIR"] = str(tmp_path_factory.mktemp("precess-state"))
    yield
    if old is None:
        os.environ.pop("PRECESS_STATE_DIR", None)
    else:
        os.environ["PRECESS_STATE_DIR"] = old


@pytest.fixture(scope="session")
def two_run_template(tmp_path_factory):
    """A store file with two analysed simulated runs (build once; copy it before changing it)."""
    from tests.store_data import two_run_store

    path = tmp_path_factory.mktemp("stores") / "two-runs.sqlite"
    run_a, run_b = two_run_store(path)
    return path, run_a, run_b


def pytest_addoption(parser: pytest.Parser) -> None:
    parser.addoption("--hardware", action="store_true", default=False,
                     help="also run tests that need real instruments attached (marked 'hardware')")


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    """Real-hardware tests are opt-in: skipped unless --hardware is given."""
    if config.getoption("--hardware"):
        return
    skip = pytest.mark.skip(reason="needs real hardware; run with --hardware")
    for item in items:
        if "hardware" in item.keywords:
            item.add_marker(skip)
