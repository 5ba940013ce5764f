"""The command line (`/usr/bin/python3 -m veer`) runs on every shipped
scenario, writes a non-empty figure (PNG signature per the PNG spec, ISO/IEC
15948; SVG root element per SVG 1.1) and a CSV table, and prints the safety
caution in its help."""

import csv
import json
import os
import subprocess
import sys

import pytest

import conftest

SCENARIOS = conftest.shipped_scenarios()


def run(*args, ok=True):
    env = dict(os.environ, MPLBACKEND="Agg")
    env["PYTHONPATH"] = os.pathsep.join([str(conftest.REPO / "bindings" / "python"), env.get("PYTHONPATH", "")])
    r = subprocess.run([sys.executable, "-m", "veer", *map(str, args)], capture_output=True, text=True, env=env,
                       timeout=600)
    if ok:
        assert r.returncode == 0, r.stderr[-3000:]
    return r


def test_help_carries_the_caution():
    for args in ([], ["plan"], ["draw"], ["table"]):
        out = " ".join(run(*args, "--help").stdout.split())
        assert "not a safety-rated function" in out and "emergency stop" in out and "safety officer" in out


def test_shipped_scenarios_exist():
    kinds = set()
    for path in SCENARIOS:
        kinds.add(conftest.load_scenario(path)["drive"]["kind"])
    assert kinds == {"DRIVE_KIND_STEERED", "DRIVE_KIND_MECANUM", "DRIVE_KIND_OMNI", "DRIVE_KIND_DIFFERENTIAL"}


@pytest.mark.parametrize("path", SCENARIOS, ids=[p.stem for p in SCENARIOS])
def test_cli_on_scenario(veer, path, tmp_path):
    p = veer.plan(str(path))
    out = run("plan", path).stdout
    assert "duration %.3f s" % p.duration in out and "binding limits" in out
    d = json.loads(run("plan", path, "--json").stdout)
    assert d["status"] == "OK" and d["duration_s"] == pytest.approx(p.duration)
    assert len(d["legs"]) == len(p.legs) and abs(sum(d["binding_share"].values()) - 1.0) < 1e-9
    png, svg = tmp_path / "fig.png", tmp_path / "fig.svg"
    run("draw", path, "-o", png)
    data = png.read_bytes()
    assert len(data) > 20000 and data[:8] == b"\x89PNG\r\n\x1a\n"
    run("draw", path, "-o", svg)
    text = svg.read_text()
    assert len(text) > 20000 and "<svg" in text[:2000]
    out_csv = tmp_path / "table.csv"
    run("table", path, "--rate", "25", "-o", out_csv)
    with open(out_csv) as f:
        rows = list(csv.reader(f))
    tab = p.table(25.0)
    assert len(rows) == len(tab) + 1
    head = rows[0]
    assert head[0] == "t_s" and len(head) == 17 + 4 * p.module_count
    assert float(rows[-1][0]) == pytest.approx(p.duration, rel=1e-8)


def test_plan_bytes_file_round_trip(veer, tmp_path):
    path = SCENARIOS[0]
    bin_file = tmp_path / "plan.bin"
    run("plan", path, "--out", bin_file)
    assert veer.Plan.from_bytes(bin_file.read_bytes()).to_bytes() == veer.plan(str(path)).to_bytes()
    run("draw", bin_file, "-o", tmp_path / "from_bytes.png")
    assert (tmp_path / "from_bytes.png").stat().st_size > 20000
    r = run("table", bin_file, "--rate", "10")
    assert r.stdout.startswith("t_s,phase,leg")


def test_cli_reports_refusals(tmp_path):
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps({"drive": {"kind": "DRIVE_KIND_MECANUM"}, "route": {"legs": []}}))
    r = run("plan", bad, ok=False)
    assert r.returncode == 1 and "veer: ERR_" in r.stderr
    r = run("plan", bad, "--json", ok=False)
    assert r.returncode == 1 and json.loads(r.stdout)["status"].startswith("ERR_")
    garbage = tmp_path / "garbage.bin"
    garbage.write_bytes(b"\x01\x02\x03 not a plan")
    r = run("draw", garbage, "-o", tmp_path / "x.png", ok=False)
    assert r.returncode == 1 and "ERR_" in r.stderr and not (tmp_path / "x.png").exists()
    r = run("draw", SCENARIOS[0], "-o", tmp_path / "x.pdf", ok=False)
    assert r.returncode == 2
