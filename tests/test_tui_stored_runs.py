"""Runs started from the terminal UI are stored as `precess run` stores them, so that
`precess analyze --db --run` rebuilds them (the Larmor frequency and its source are in the
run's config snapshot).

Common practice, no source: a stored run must carry what is needed to analyse it again.
"""

from __future__ import annotations

import json

import pytest

from controller.cli.main import main
from controller.store import Store

from tests.tui_support import make_app, plan_sequence, quick_idle, wait_for

pytestmark = pytest.mark.timeout(120)


@pytest.fixture(autouse=True)
def _quick_idle(monkeypatch):
    quick_idle(monkeypatch)


async def test_a_tui_cpmg_run_keeps_its_larmor_frequency_and_analyze_rebuilds_it(tmp_path, capsys):
    db = tmp_path / "tui.sqlite"
    app = make_app(db)
    async with app.run_test(size=(80, 24)) as pilot:
        for name, shots in (("fid-sudden", "3"), ("cpmg-t2", "2")):  # the fid measures; cpmg takes the "last" one
            screen = await plan_sequence(pilot, name, {"shots": shots})
            assert screen.check is not None and screen.check.ready, screen.check
            await pilot.press("plus")
        await wait_for(pilot, lambda: len(app.session.queued()) == 2, 5, "the queue")
        await pilot.press("g")
        await wait_for(pilot, lambda: app.state.run is not None and app.state.run.run_id == "run-0002"
                       and app.state.run.exit_status == "completed" and not app.session.running, 60, "both runs")
    with Store(db) as store:
        measured_hz = store.results("run-0001")[-1]["frequency_hz"]
        config = store.run("run-0002")["config"]
        (stored,) = store.results("run-0002")
    assert config["larmor_hz"] == pytest.approx(measured_hz, rel=1e-12)
    assert config["larmor_source"] == "last measurement (run run-0001)"
    capsys.readouterr()
    assert main(["analyze", "--db", str(db), "--run", "run-0002", "--json"]) == 0
    result = json.loads(capsys.readouterr().out)
    assert result["kind"] == "cpmg" and result["larmor_source"] == config["larmor_source"]
    assert result["larmor_hz"] == pytest.approx(measured_hz, rel=1e-12)
    assert result["t2_s"] == pytest.approx(stored["t2_s"], rel=1e-9)  # the same timeline, compiled again
