"""pytest set-up for the Python suites: the package from the source tree
(bindings/python) unless one is installed, the repository paths, and the
scenarios the checks run on."""

import json
import os
import pathlib
import sys

import pytest

HERE = pathlib.Path(__file__).resolve().parent
REPO = HERE.parents[1]
SCENARIO_DIR = REPO / "examples" / "scenarios"
if os.environ.get("VEER_TEST_INSTALLED") != "1":
    sys.path.insert(0, str(REPO / "bindings" / "python"))
sys.path.insert(0, str(HERE))
os.environ.setdefault("MPLBACKEND", "Agg")


def shipped_scenarios():
    return sorted(SCENARIO_DIR.glob("*.json"))


def load_scenario(path):
    with open(path) as f:
        return json.load(f)


@pytest.fixture(scope="session")
def veer():
    import veer as v

    v.library()  # fails the test with the loader's message when libveer is missing
    return v
