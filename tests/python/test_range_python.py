"""The range checks from Python (veer.range) and the CLI (`check`, `draw
--range`), against Shapely (Debian's python3-shapely) and brute-force
sampling; the ctypes structures against the C compiler's layout of
include/veer/range.h. The range and carts are invented (examples/ranges).
SPDX-License-Identifier: MIT
"""

import ctypes
import json
import math
import os
import pathlib
import shutil
import subprocess
import sys

import pytest

pytest.importorskip("shapely.geometry")  # python3-shapely, listed in tests/run.sh
from shapely.geometry import Polygon  # noqa: E402

HERE = pathlib.Path(__file__).resolve().parent
REPO = HERE.parents[1]
DEMO = REPO / "examples" / "scenarios" / "kestrel_flats_lane4_demo.json"
RANGE = REPO / "examples" / "ranges" / "kestrel_flats_lane4.json"


@pytest.fixture(scope="module")
def vr(veer):
    import veer.range as m

    return m


def _world(fp, pose):
    c, s = math.cos(pose[2]), math.sin(pose[2])
    return Polygon([(pose[0] + c * x - s * y, pose[1] + s * x + c * y) for x, y in fp.points])


def test_struct_layout_matches_the_header(vr, tmp_path):
    """sizeof and offsetof of the range.h structs, as gcc lays them out,
    equal the ctypes mirrors (a mismatch would corrupt memory)."""
    cc = shutil.which("cc") or shutil.which("gcc")
    if cc is None:
        pytest.skip("no C compiler")
    checks = {
        "veer_outline": (vr.COutline, ["count", "points"]),
        "veer_footprint": (vr.CFootprint, ["shape", "margin"]),
        "veer_speed_zone": (vr.CSpeedZone, ["area", "speed"]),
        "veer_range": (vr.CRange, ["keep_in", "keep_out_count", "keep_out", "zone_count", "zones"]),
        "veer_range_event": (vr.CRangeEvent, ["t", "s", "pose", "area", "margin"]),
        "veer_range_report": (vr.CRangeReport, ["clear", "worst", "violated", "first_violation",
                                                "first_violation_end", "poses"]),
        "veer_braking_report": (vr.CBrakingReport, [f for f, _ in vr.CBrakingReport._fields_]),
        "veer_cart": (vr.CCart, ["plan", "start_time", "footprint"]),
        "veer_separation_report": (vr.CSeparationReport, [f for f, _ in vr.CSeparationReport._fields_]),
    }
    lines = ["#include <stdio.h>", "#include <stddef.h>", "#include <veer/range.h>", "int main(void) {"]
    for name, (_, fields) in checks.items():
        lines.append('printf("%s %%zu\\n", sizeof(%s));' % (name, name))
        for f in fields:
            lines.append('printf("%s.%s %%zu\\n", offsetof(%s, %s));' % (name, f, name, f))
    lines += ["return 0;", "}"]
    src = tmp_path / "layout.c"
    src.write_text("\n".join(lines))
    exe = tmp_path / "layout"
    subprocess.run([cc, "-std=c11", "-I", str(REPO / "include"), str(src), "-o", str(exe)], check=True)
    got = dict(line.split() for line in subprocess.run([str(exe)], capture_output=True, text=True,
                                                        check=True).stdout.splitlines())
    for name, (cls, fields) in checks.items():
        assert int(got[name]) == ctypes.sizeof(cls), name
        for f in fields:
            assert int(got["%s.%s" % (name, f)]) == getattr(cls, f).offset, (name, f)


def test_demo_range_zones_hold_and_margin_matches_shapely(vr):
    """On the demo scenario planned with the demo range's speed zones:
    wherever Shapely finds the footprint grown by its margin (buffer: a
    polygon inside the true grown footprint) touching a zone, the body speed
    is within the cap, at every millisecond; and the worst margin agrees
    with Shapely's distances at every 1 mm of path (within 1 mm plus what
    1 mm steps can hide, |dpose/ds| * 1 mm)."""
    rng, fp = vr.load(str(RANGE))
    p = vr.plan_in_range(str(DEMO), rng, fp)
    zones = [(Polygon(a), v) for a, v in rng.zones]
    tab = p.table(1000.0)
    met = 0
    for k in range(len(tab)):
        grown = _world(fp, tab.pose[k]).buffer(fp.margin)
        speed = math.hypot(tab.twist_world[k][0], tab.twist_world[k][1])
        for z, cap in zones:
            if grown.intersects(z):
                met += 1
                assert speed <= cap * (1 + 1e-9), (tab.t[k], speed, cap)
    assert met > 1000
    chk = vr.check(p, rng, fp)
    keep_in = Polygon(rng.keep_in)
    outs = [Polygon(o) for o in rng.keep_out]
    n = int(p.length / 1e-3) + 1
    q, _, _ = p.path_at([p.length * i / (n - 1) for i in range(n)])
    ref = math.inf
    for pose in q:
        F = _world(fp, pose)
        ref = min(ref, keep_in.exterior.distance(F) - fp.margin, *[o.distance(F) - fp.margin for o in outs])
    assert chk.report["clear"] and ref > 0
    assert abs(chk.report["worst"]["margin"] - ref) <= 1e-3 + 1.5e-3, (chk.report["worst"], ref)
    # the braking envelope's longest stop is the uniform-deceleration stop from
    # top speed with the plan's braking (v^2 / 2a, any physics text): 2.2 m/s at 2 m/s^2
    b = chk.braking
    assert abs(b["stop_distance"] - b["stop_speed"] ** 2 / (2 * 2.0)) < 2e-2


def test_separation_against_brute_force(vr, veer):
    """Two invented carts crossing at right angles, the second 1.3 s late:
    minimum separation and first conflict against Shapely distances sampled
    every millisecond."""
    def lane(x0, y0, x1, y1, v):
        return veer.plan({"drive": {"kind": "DRIVE_KIND_MECANUM"},
                          "limits": {"bodySpeed": v, "bodyAccel": 1.0},
                          "route": {"startX": x0, "startY": y0,
                                    "legs": [{"kind": "LEG_KIND_TRAVEL", "waypointCount": 1}],
                                    "waypoints": [{"x": x1, "y": y1, "stop": True}]}})
    a, b = lane(-8.0, 0.0, 8.0, 0.0, 2.0), lane(0.0, -8.0, 0.0, 8.0, 1.5)
    fa, fb = vr.Footprint.rectangle(0.5, 0.5, 0.3, 0.3, 0.1), vr.Footprint.rectangle(0.6, 0.4, 0.35, 0.35, 0.05)
    rep = vr.separation([(a, 0.0, fa), (b, 1.3, fb)], 2.0)
    ta, tb = a.table(1000.0), b.table(1000.0)
    best, first = math.inf, None
    T_end = max(a.duration, 1.3 + b.duration)
    for k in range(int(T_end * 1000) + 1):
        T = k / 1000.0
        pa = ta.pose[min(k, len(ta) - 1)]
        kb = int(round((T - 1.3) * 1000))
        pb = tb.pose[min(max(kb, 0), len(tb) - 1)]
        sep = _world(fa, pa).distance(_world(fb, pb)) - 0.15
        best = min(best, sep)
        if first is None and sep < 2.0:
            first = T
    assert abs(rep["min_separation"] - best) < 5e-3, (rep, best)
    assert rep["conflict"] == (first is not None)
    if first is not None:
        assert abs(rep["conflict_t"] - first) <= 1.5e-3, (rep["conflict_t"], first)
    with pytest.raises(veer.PlanError):
        vr.separation([(a, 0.0, fa)], 1.0)


def test_bytes_api_gives_the_same_figures(vr, veer):
    """Through range.proto from Python (protoc classes, veer_range_check_pb):
    the reply carries the figures of the demo check, which match Shapely's
    distance to the nearest area at the worst pose (to 1e-9 m)."""
    rng, fp = vr.load(str(RANGE))
    p = vr.plan_in_range(str(DEMO), rng, fp)
    rep = vr.check_bytes(p.to_bytes(), rng, fp)
    w = rep.report.worst
    assert rep.report.clear and w.area_name == "keep_out[1]"
    F = _world(fp, (w.x, w.y, w.yaw))
    assert abs(w.margin - (Polygon(rng.keep_out[1]).distance(F) - fp.margin)) < 1e-9
    assert rep.HasField("braking") and rep.braking.stop_distance > 1.0
    bad = vr.Range(keep_in=None, keep_out=rng.keep_out)
    with pytest.raises(veer.PlanError) as e:
        vr.check_bytes(p.to_bytes(), bad, fp)
    assert "keep-in" in str(e.value)


def _cli(*args):
    env = dict(os.environ)
    env.setdefault("MPLBACKEND", "Agg")
    return subprocess.run([sys.executable, "-m", "veer"] + list(args), capture_output=True, text=True, env=env,
                          cwd=str(REPO))


def test_cli_check_and_draw(tmp_path):
    r = _cli("check", str(DEMO), str(RANGE), "--json")
    assert r.returncode == 0, r.stderr
    d = json.loads(r.stdout)
    assert d["clear"] and d["report"]["worst"]["area"] == "keep_out[1]"
    # a keep-out across the lane: violated, exit status 3, named in the report
    rng = json.loads(RANGE.read_text())
    rng["range"]["keepOut"].append({"points": [{"x": -2.0, "y": 0.0}, {"x": -1.0, "y": 0.0},
                                               {"x": -1.0, "y": 3.0}, {"x": -2.0, "y": 3.0}]})
    bad = tmp_path / "blocked.json"
    bad.write_text(json.dumps(rng))
    r = _cli("check", str(DEMO), str(bad))
    assert r.returncode == 3, r.stdout + r.stderr
    assert "VIOLATED" in r.stdout and "keep_out[2]" in r.stdout
    out = tmp_path / "k4.png"
    r = _cli("draw", str(DEMO), "--range", str(bad), "-o", str(out))
    assert r.returncode == 0, r.stderr
    assert out.stat().st_size > 10000
    # a bow-tie keep-out is refused by name
    rng["range"]["keepOut"][0] = {"points": [{"x": 0, "y": 0}, {"x": 1, "y": 1}, {"x": 1, "y": 0}, {"x": 0, "y": 1}]}
    bad.write_text(json.dumps(rng))
    r = _cli("check", str(DEMO), str(bad))
    assert r.returncode == 1 and "keep_out[0]" in r.stderr, r.stderr
