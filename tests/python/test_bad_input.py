"""Bad input from Python (wrong types, NaN, garbage bytes, over-capacity
lists) gets a PlanError with a named status and a message, and the
interpreter survives (a fuzz loop runs in a child interpreter whose exit
status is checked). Limits and capacities: include/veer/*.h and
proto/veer/v1/*.options; statuses: include/veer/status.h."""

import copy
import json
import math
import os
import subprocess
import sys

import numpy as np
import pytest

import conftest

STATUSES = {"ERR_NULL", "ERR_VALUE", "ERR_CAPACITY", "ERR_GEOMETRY", "ERR_INFEASIBLE", "ERR_UNBOUNDED",
            "ERR_NO_MEMORY", "ERR_BUFFER", "ERR_DECODE", "ERR_VERSION", "ERR_STATE", "ERR_LATE"}
BASE = conftest.load_scenario(conftest.SCENARIO_DIR / "south_lane1_mecanum.json")
STEERED = conftest.load_scenario(conftest.SCENARIO_DIR / "north_lane3_steered.json")


def refused(veer, request, status=None):
    with pytest.raises(veer.PlanError) as ei:
        veer.plan(request)
    e = ei.value
    assert e.status in STATUSES and e.message
    if status is not None:
        assert e.status == status, str(e)
    return e


def edit(base, path, value):
    d = copy.deepcopy(base)
    cur = d
    for k in path[:-1]:
        cur = cur[k]
    cur[path[-1]] = value
    return d


@pytest.mark.parametrize("request_", [None, 42, 3.5, [1, 2], {1, 2}, object(), True],
                         ids=["None", "int", "float", "list", "set", "object", "bool"])
def test_wrong_request_types(veer, request_):
    e = refused(veer, request_, "ERR_VALUE")
    assert "PlanRequest" in e.message


@pytest.mark.parametrize("path,value", [
    (("drive",), 3),
    (("drive", "kind"), "DRIVE_KIND_HOVERCRAFT"),
    (("drive", "wheelRadius"), "fast"),
    (("route", "legs"), "all of them"),
    (("route", "waypoints", 0, "x"), [1.0]),
    (("limits", "modules"), {"wheelRate": 1}),
    (("options", "gridPoints"), -5),
    (("options", "gridPoints"), 2 ** 40),
    (("nonsenseField",), 1),
], ids=lambda v: str(v))
def test_wrong_field_types(veer, path, value):
    refused(veer, edit(BASE, path, value), "ERR_VALUE")


@pytest.mark.parametrize("path", [
    ("limits", "bodySpeed"), ("limits", "modules", 0, "wheelAccel"), ("drive", "wheelRadius"),
    ("drive", "halfTrack"), ("route", "startX"), ("route", "waypoints", 1, "y"), ("route", "waypoints", 0, "dwell"),
    ("route", "legs", 0, "cornerTolerance"),
], ids=lambda p: ".".join(map(str, p)))
@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf, "NaN"], ids=["nan", "inf", "-inf", "NaN-string"])
def test_nan_and_infinite_values(veer, path, bad):
    if path == ("limits", "bodySpeed") and bad == math.inf:
        pytest.skip("+inf is a documented way to leave a limit unset (limits.proto)")
    if path[:2] == ("limits", "modules") and bad == math.inf:
        pytest.skip("+inf is a documented way to leave a limit unset (limits.proto)")
    e = refused(veer, edit(BASE, path, bad))
    assert e.status in ("ERR_VALUE", "ERR_GEOMETRY", "ERR_INFEASIBLE")


def test_nan_names_the_field(veer):
    # Python's float NaN reaches libveer (spelled "NaN" as the proto3 JSON
    # mapping does), whose diagnostic names the field.
    e = refused(veer, edit(BASE, ("limits", "bodySpeed"), math.nan), "ERR_VALUE")
    assert "body_speed" in e.message or e.limit == "body_speed"
    e = refused(veer, edit(STEERED, ("limits", "modules"), [{"steerRate": math.nan}]), "ERR_VALUE")
    assert "steer_rate" in e.message or (e.limit or "").startswith("steer_rate")
    e = refused(veer, edit(BASE, ("route", "waypoints", 3, "x"), math.nan), "ERR_VALUE")
    assert e.waypoint == 3


def test_over_capacity_lists(veer):
    # capacities: VEER_MAX_WAYPOINTS 64, VEER_MAX_LEGS 32, VEER_MAX_MODULES 8
    many = edit(BASE, ("route", "waypoints"), [{"x": float(i), "y": 0.0, "stop": True} for i in range(1, 66)])
    many["route"]["legs"] = [{"kind": "LEG_KIND_TRAVEL", "waypointCount": 65}]
    refused(veer, many, "ERR_CAPACITY")
    legs = copy.deepcopy(STEERED)
    legs["route"]["legs"] = [{"kind": "LEG_KIND_SPIN", "yaw": (i % 2) * 1.0 + 0.5} for i in range(33)]
    legs["route"]["waypoints"] = []
    refused(veer, legs, "ERR_CAPACITY")
    mods = edit(STEERED, ("drive", "modules"), [{"x": 0.3 * math.cos(i), "y": 0.3 * math.sin(i)} for i in range(9)])
    refused(veer, mods, "ERR_CAPACITY")
    lims = edit(STEERED, ("limits", "modules"), [{"wheelRate": 10.0}] * 9)
    refused(veer, lims, "ERR_CAPACITY")
    steer = edit(STEERED, ("route", "startSteer"), [0.0] * 9)
    refused(veer, steer, "ERR_CAPACITY")
    cart = edit(BASE, ("cartId",), "x" * 200)
    refused(veer, cart, "ERR_CAPACITY")


def test_wrong_module_limit_count(veer):
    # limits.proto: empty, one entry, or exactly one per module
    refused(veer, edit(STEERED, ("limits", "modules"), [{"wheelRate": 10.0}] * 3))


def test_semantic_errors_are_named(veer):
    e = refused(veer, edit(BASE, ("limits", "bodySpeed"), 0.0), "ERR_INFEASIBLE")
    assert e.limit == "body_speed"
    refused(veer, edit(BASE, ("drive", "kind"), "DRIVE_KIND_UNSPECIFIED"), "ERR_VALUE")
    refused(veer, edit(BASE, ("route", "legs"), []), "ERR_VALUE")
    unbounded = copy.deepcopy(BASE)
    unbounded["limits"] = {}
    refused(veer, unbounded, "ERR_UNBOUNDED")
    sideways = copy.deepcopy(conftest.load_scenario(conftest.SCENARIO_DIR / "west_lane2_skid.json"))
    sideways["route"]["legs"][0]["heading"] = "HEADING_HOLD"
    e = refused(veer, sideways)
    assert e.status in ("ERR_INFEASIBLE", "ERR_GEOMETRY")


def test_scenario_files(veer, tmp_path):
    missing = tmp_path / "missing.json"
    e = refused(veer, str(missing), "ERR_VALUE")
    assert "missing.json" in e.message
    bad = tmp_path / "bad.json"
    bad.write_text("{ this is not json")
    refused(veer, str(bad), "ERR_DECODE")
    arr = tmp_path / "array.json"
    arr.write_text("[1, 2, 3]")
    refused(veer, arr, "ERR_DECODE")
    binary = tmp_path / "binary.json"
    binary.write_bytes(bytes(range(256)))
    refused(veer, str(binary), "ERR_DECODE")


def test_garbage_request_bytes(veer):
    rng = np.random.default_rng(3)
    for n in (1, 2, 7, 64, 1000):
        for _ in range(20):
            data = rng.integers(0, 256, n, dtype=np.uint8).tobytes()
            try:
                veer.plan(data)
            except veer.PlanError as e:
                assert e.status in STATUSES and e.message


def test_garbage_and_damaged_plan_bytes(veer):
    good = veer.plan(BASE).to_bytes()
    for bad in (b"", b"garbage", b"\x00" * 50, good[: len(good) // 2], good + b"\x00", bytes(reversed(good))):
        with pytest.raises(veer.PlanError) as ei:
            veer.Plan.from_bytes(bad)
        assert ei.value.status in STATUSES and ei.value.message
    # every truncation and every single-byte change is refused (the content hash covers the rest)
    for n in range(len(good)):
        with pytest.raises(veer.PlanError):
            veer.Plan.from_bytes(good[:n])
    # Every single-byte change is refused or decodes to the same message (a
    # varint bool that stays non-zero is still true: protobuf encoding rules).
    from veer import _pb

    PlanMsg = _pb.message("Plan")
    same = 0
    for i in range(len(good)):
        damaged = bytearray(good)
        damaged[i] ^= 0x5A
        try:
            q = veer.Plan.from_bytes(bytes(damaged))
        except veer.PlanError:
            continue
        same += 1
        assert PlanMsg.FromString(bytes(damaged)) == PlanMsg.FromString(good), i
        assert q.duration == veer.Plan.from_bytes(good).duration
    assert same < len(good) // 20
    for bad in (None, 12, "text", [1, 2]):
        with pytest.raises(veer.PlanError) as ei:
            veer.Plan.from_bytes(bad)
        assert ei.value.status == "ERR_VALUE"


def test_bad_sampling_arguments(veer):
    p = veer.plan(BASE)
    for bad in (math.nan, math.inf, "1.0", None, [1.0], True):
        with pytest.raises(veer.PlanError):
            p.sample(bad)
    for bad in (0.0, -5.0, math.nan, math.inf, "50"):
        with pytest.raises(veer.PlanError):
            p.table(bad)
    for bad in (math.nan, -1.0, p.length + 1.0, "s"):
        with pytest.raises(veer.PlanError):
            p.path_at(bad)
    with pytest.raises(veer.PlanError):
        p.path_at(np.array([0.0, math.nan]))


def test_errors_change_nothing(veer):
    # the same good request plans to the same bytes before and after a run of refusals
    before = veer.plan(BASE).to_bytes()
    for bad in (edit(BASE, ("limits", "bodySpeed"), math.nan), b"\xff\xff", 7, {"route": {"legs": []}}):
        with pytest.raises(veer.PlanError):
            veer.plan(bad)
    assert veer.plan(BASE).to_bytes() == before


FUZZ = r"""
import copy, json, math, random, sys
import veer
base = json.load(open(sys.argv[1]))
good = veer.plan(base).to_bytes()
rnd = random.Random(11)
values = [math.nan, math.inf, -math.inf, -1.0, 0.0, 1e300, -1e300, 5e-324, "x", None, [], {}, 2**70, True]
def paths(d, pre=()):
    if isinstance(d, dict):
        for k, v in d.items():
            yield pre + (k,)
            yield from paths(v, pre + (k,))
    elif isinstance(d, list):
        for i, v in enumerate(d):
            yield pre + (i,)
            yield from paths(v, pre + (i,))
all_paths = list(paths(base))
refused = ok = 0
for it in range(int(sys.argv[2])):
    d = copy.deepcopy(base)
    p = rnd.choice(all_paths)
    cur = d
    for k in p[:-1]:
        cur = cur[k]
    cur[p[-1]] = rnd.choice(values)
    try:
        veer.plan(d)
        ok += 1
    except veer.PlanError as e:
        assert e.message and e.status.startswith("ERR_"), e
        refused += 1
    b = bytearray(good)
    for _ in range(rnd.randint(1, 4)):
        b[rnd.randrange(len(b))] = rnd.randrange(256)
    try:
        veer.Plan.from_bytes(bytes(b))
    except veer.PlanError:
        refused += 1
print("survived", ok, refused)
"""


def test_fuzz_loop_in_a_child_interpreter(tmp_path):
    script = tmp_path / "fuzz.py"
    script.write_text(FUZZ)
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(conftest.REPO / "bindings" / "python"), env.get("PYTHONPATH", "")])
    r = subprocess.run([sys.executable, str(script), str(conftest.SCENARIO_DIR / "north_lane3_steered.json"), "300"],
                       capture_output=True, text=True, env=env, timeout=600)
    assert r.returncode == 0, r.stderr[-3000:]
    assert "survived" in r.stdout
