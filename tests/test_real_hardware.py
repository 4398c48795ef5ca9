"""Tests on a real rig: opt-in with `pytest --hardware` and PRECESS_HARDWARE_RIG=path/to/rig.toml.

They never drive polarising current unless PRECESS_HARDWARE_CURRENT_A is also set.
"""

from __future__ import annotations

import os

import pytest

from controller.cli.main import main

pytestmark = pytest.mark.hardware


@pytest.fixture
def rig_path():
    path = os.environ.get("PRECESS_HARDWARE_RIG")
    if not path:
        pytest.skip("set PRECESS_HARDWARE_RIG to the rig file of the attached hardware")
    return path


def test_the_attached_rig_passes_its_safe_self_test(rig_path):
    assert main(["rig", "test", rig_path]) == 0


def test_the_attached_rig_carries_current_when_asked(rig_path):
    current = os.environ.get("PRECESS_HARDWARE_CURRENT_A")
    if not current:
        pytest.skip("set PRECESS_HARDWARE_CURRENT_A to let this test energise the coil")
    assert main(["rig", "test", rig_path, "--current", current]) == 0
