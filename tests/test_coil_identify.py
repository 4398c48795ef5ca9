"""`precess coil record` on the simulated rig, then `precess coil identify` on the curve.

The simulated coil's thermal parameters are the truth the fit must recover; the choice of
one or two nodes must follow the data (BIC, Schwarz 1978).  Tolerances are set by the
readback noise of the simulated supply (1e-4 relative, about 0.04 K).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from controller.cli.main import main
from controller.coil_identify import read_curve_csv
from controller.errors import InputError
from rig_files import write_rig, write_sequence

TWO_NODE = {"coil": {"heat_capacity_j_per_k": 120.0, "thermal_resistance_k_per_w": 4.0,
                     "former_heat_capacity_j_per_k": 500.0, "winding_to_former_k_per_w": 0.6}}


def record_and_identify(tmp_path: Path, rig_overrides: dict, capsys, monkeypatch) -> tuple[dict, Path]:
    monkeypatch.setenv("PRECESS_STATE_DIR", str(tmp_path / "state"))
    rig = write_rig(tmp_path, rig_overrides)
    curve = tmp_path / "curve.csv"
    assert main(["coil", "record", "--rig", str(rig), "--out", str(curve), "--current-a", "3",
                 "--heat-s", "900", "--cool-s", "1200", "--period-s", "5"]) == 0
    capsys.readouterr()
    assert main(["coil", "identify", str(curve), "--rig", str(rig), "--ambient-c", "18", "--json"]) == 0
    return json.loads(capsys.readouterr().out), curve


def test_one_node_coil_is_identified_as_one_node(tmp_path: Path, capsys, monkeypatch) -> None:
    result, curve = record_and_identify(tmp_path, {}, capsys, monkeypatch)
    assert result["nodes"] == 1
    assert result["parameters"]["heat_capacity_j_per_k"] == pytest.approx(250.0, rel=0.01)
    assert result["parameters"]["thermal_resistance_k_per_w"] == pytest.approx(4.0, rel=0.01)
    assert result["rms_k"] < 0.1
    data = read_curve_csv(curve)
    assert 65.0 <= np.nanmax(data.temperature_c) < 65.0 + 1.0  # heating stops at the first sample over 65 C
    assert "largest" in result["sensors"]  # thermistor and resistance method compared


def test_two_node_coil_calls_for_the_second_node(tmp_path: Path, capsys, monkeypatch) -> None:
    result, _ = record_and_identify(tmp_path, TWO_NODE, capsys, monkeypatch)
    assert result["nodes"] == 2
    assert result["one_node"]["rms_k"] > 5 * result["two_node"]["rms_k"]
    truth = TWO_NODE["coil"]
    for key, value in truth.items():
        assert result["parameters"][key] == pytest.approx(value, rel=0.05), key


def test_predict_writes_every_point_and_flags_an_overheating_plan(tmp_path: Path, capsys) -> None:
    rig = write_rig(tmp_path, {"coil": {"heat_capacity_j_per_k": 15.0}})
    seq = write_sequence(tmp_path, shots=8, current_a=3.0, polarise_s=5.0)
    out = tmp_path / "predicted.csv"
    assert main(["coil", "predict", str(seq), "--rig", str(rig), "--csv", str(out)]) == 5
    assert "OVER the 70 C limit" in capsys.readouterr().out
    predicted = read_curve_csv(out)
    assert predicted.times_s.size > 8 * 2 * 8  # interior points in every step
    assert np.all(np.diff(predicted.times_s) > 0)


@pytest.mark.parametrize("text, message", [
    ("time_s,current_a\n1,2\n", "missing column(s) temperature_c"),
    ("time_s,current_a,temperature_c\n" + "".join(f"{t},2,x\n" for t in range(9)), "is not a number"),
    ("time_s,current_a,temperature_c\n" + "".join(f"{9 - t},2,20\n" for t in range(9)), "increasing"),
])
def test_bad_curve_files_get_one_clear_line(tmp_path: Path, text: str, message: str) -> None:
    path = tmp_path / "bad.csv"
    path.write_text(text)
    with pytest.raises(InputError, match=message.replace("(", r"\(").replace(")", r"\)")):
        read_curve_csv(path)
