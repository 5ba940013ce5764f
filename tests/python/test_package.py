"""The package itself: versions, the loader, the ctypes structures against the
C headers, and the offline pip install into a venv.

Sources: include/veer/version.h (the one version source), the C compiler's
sizeof/offsetof of the structs in include/veer/*.h (the ABI ctypes must
mirror), pip's documented offline options (--no-build-isolation --no-index)."""

import ctypes
import os
import pathlib
import re
import shutil
import subprocess
import sys
import venv

import pytest

import conftest


def test_version_matches_header(veer):
    text = (conftest.REPO / "include" / "veer" / "version.h").read_text()
    want = re.search(r'#define VEER_VERSION_STRING "([^"]+)"', text).group(1)
    assert veer.__version__ == want
    lib = veer.library()
    assert lib.veer_version_string().decode() == want


def test_schema_version_matches_library(veer):
    text = (conftest.REPO / "include" / "veer" / "wire.h").read_text()
    want = int(re.search(r"#define VEER_WIRE_SCHEMA_VERSION (\d+)", text).group(1))
    assert veer.SCHEMA_VERSION == want == veer.library().veer_wire_schema_version()


def test_version_check_refuses_other_releases(veer):
    from veer import _lib

    class Fake:
        path = "fake"

        def has(self, name):
            return True

        def version(self):
            return (9, 4, 0)

    with pytest.raises(_lib.LibraryNotFound) as ei:
        _lib._check_version(Fake())
    assert "9.4.0" in str(ei.value)


def test_schema_check_refuses_other_schema(veer):
    from veer import _lib

    planmod = sys.modules["veer.plan"]  # the module; the package's `plan` attribute is the function

    class Fake:
        path = "fake"

        def has(self, name):
            return True

        def veer_wire_schema_version(self):
            return 99

    with pytest.raises(_lib.LibraryNotFound) as ei:
        planmod._check_schema(Fake())
    assert "99" in str(ei.value)


def test_loader_search_order(monkeypatch):
    from veer import _lib

    monkeypatch.setenv("VEER_LIBRARY", "/nowhere/libveer.so")
    c = [str(p) for p in _lib.candidate_paths()]
    pkg = str(pathlib.Path(_lib.__file__).resolve().parent / "libveer.so")
    assert c[0] == "/nowhere/libveer.so"
    assert c.index(pkg) < c.index(str(conftest.REPO / "build" / "ci" / "libveer.so")) < c.index(
        str(conftest.REPO / "build" / "libveer.so"))


def test_missing_library_is_a_clear_error(tmp_path):
    # A copy of the package outside the source tree, with VEER_LIBRARY pointing nowhere.
    dst = tmp_path / "pkg"
    shutil.copytree(conftest.REPO / "bindings" / "python" / "veer", dst / "veer",
                    ignore=shutil.ignore_patterns("libveer.so*", "__pycache__"))
    env = dict(os.environ, VEER_LIBRARY=str(tmp_path / "none.so"), PYTHONPATH=str(dst), LD_LIBRARY_PATH="")
    code = "import veer\ntry:\n    veer.library()\nexcept veer.LibraryNotFound as e:\n    print('NOTFOUND', e)\n"
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, cwd=str(tmp_path))
    assert r.returncode == 0, r.stderr
    if "NOTFOUND" not in r.stdout:
        pytest.skip("a libveer is installed on the system search path")
    assert "VEER_LIBRARY" in r.stdout and "none.so" in r.stdout


ABI_FIELDS = {
    "veer_limit_id": ["kind", "module"],
    "veer_diag": ["status", "message", "leg", "waypoint", "grid_index", "s", "limit", "value"],
    "veer_module_def": ["x", "y", "drive_angle", "out"],
    "veer_drive_def": ["kind", "module_count", "modules", "wheel_radius", "half_wheelbase", "half_track",
                       "roller_angle", "track_width", "skid_factor"],
    "veer_module_limits": ["wheel_rate", "wheel_accel", "steer_rate", "steer_min", "steer_max", "traction_mu",
                           "motor_stall_accel", "motor_free_rate", "wheel_jerk"],
    "veer_limits": ["modules", "body_speed", "body_accel", "yaw_rate", "yaw_accel", "body_jerk"],
    "veer_plan_options": ["grid_points", "accel_polygon_sides", "traction_polygon_sides", "duration_target"],
    "veer_waypoint": ["x", "y", "yaw", "has_yaw", "stop", "dwell", "timed", "arrival"],
    "veer_leg": ["kind", "waypoint_count", "heading", "reversed", "toward_x", "toward_y", "corner_tolerance", "yaw",
                 "direction", "pivot_x", "pivot_y", "angle", "hold_yaw", "dwell"],
    "veer_route": ["start_x", "start_y", "start_yaw", "has_start_steer", "start_steer", "has_start_twist",
                   "start_twist", "leg_count", "legs",
                   "waypoint_count", "waypoints"],
    "veer_leg_summary": ["start", "duration", "resteer_time", "dwell_time", "s_begin", "s_end"],
    "veer_module_setpoint": ["steer", "steer_rate", "wheel_rate", "wheel_accel"],
    "veer_sample": ["t", "phase", "leg", "s", "sdot", "sddot", "pose", "twist_world", "twist_body", "accel_world",
                    "accel_body", "module_count", "modules"],
}


def test_ctypes_structures_match_the_headers(tmp_path):
    from veer import _lib

    cc = shutil.which("cc") or shutil.which("gcc") or shutil.which("clang")
    if cc is None:
        pytest.skip("no C compiler")
    lines = ['#include <stdio.h>', '#include <stddef.h>', '#include "veer/veer.h"', "int main(void) {"]
    for st, fields in ABI_FIELDS.items():
        lines.append('printf("%s %%zu\\n", sizeof(%s));' % (st, st))
        for f in fields:
            lines.append('printf("%s.%s %%zu\\n", offsetof(%s, %s));' % (st, f, st, f))
    lines.append("return 0; }")
    src = tmp_path / "abi.c"
    src.write_text("\n".join(lines))
    exe = tmp_path / "abi"
    subprocess.check_call([cc, "-std=c11", "-I", str(conftest.REPO / "include"), str(src), "-o", str(exe)])
    got = dict(line.split() for line in subprocess.check_output([str(exe)], text=True).splitlines())
    for st, fields in ABI_FIELDS.items():
        cls = _lib.STRUCTS[st]
        assert [f[0] for f in cls._fields_] == fields, st
        assert int(got[st]) == ctypes.sizeof(cls), st
        for f in fields:
            assert int(got["%s.%s" % (st, f)]) == getattr(cls, f).offset, (st, f)


def test_library_reports_the_same_struct_sizes(veer):
    # veer_sizeof (version.h) is the library's own sizeof of each public struct.
    from veer import _lib

    lib = veer.library()
    if not lib.has("veer_sizeof"):
        pytest.skip("library without veer_sizeof")
    known = 0
    for name, cls in _lib.STRUCTS.items():
        have = lib.veer_sizeof(name.encode())
        if have:
            known += 1
            assert have == ctypes.sizeof(cls), name
    for name in ("veer_drive_def", "veer_limits", "veer_route", "veer_sample", "veer_diag"):
        assert lib.veer_sizeof(name.encode()) > 0, name
    assert lib.veer_sizeof(b"no_such_struct") == 0


def test_pip_install_offline_into_a_venv(veer, tmp_path):
    # pip install --no-build-isolation --no-index works with Debian's setuptools;
    # the installed package runs from another folder with no environment set up.
    src = tmp_path / "src"
    shutil.copytree(conftest.REPO / "bindings" / "python", src,
                    ignore=shutil.ignore_patterns("build", "*.egg-info", "__pycache__", "libveer.so*", "*_pb2.py"))
    env_dir = tmp_path / "venv"
    venv.EnvBuilder(system_site_packages=True, with_pip=True).create(env_dir)
    py = env_dir / "bin" / "python"
    env = dict(os.environ, VEER_PROTO_DIR=str(conftest.REPO / "proto"), VEER_LIBRARY=veer.library().path,
               PIP_NO_INDEX="1", PIP_DISABLE_PIP_VERSION_CHECK="1")
    env.pop("PYTHONPATH", None)
    r = subprocess.run([str(py), "-m", "pip", "install", "--no-build-isolation", "--no-index", str(src)],
                       capture_output=True, text=True, env=env, timeout=600)
    assert r.returncode == 0, r.stdout[-2000:] + r.stderr[-2000:]
    env.pop("VEER_LIBRARY")
    env.pop("VEER_PROTO_DIR")
    scen = conftest.SCENARIO_DIR / "south_lane1_mecanum.json"
    code = ("import veer, sys; p = veer.plan(sys.argv[1]); print(veer.__file__); print(veer.library().path); "
            "print(p.duration)")
    r = subprocess.run([str(py), "-c", code, str(scen)], capture_output=True, text=True, env=env, cwd=str(tmp_path))
    assert r.returncode == 0, r.stderr
    where, lib, dur = r.stdout.split()
    assert str(env_dir) in where and str(env_dir) in lib   # the installed copy, with its own libveer.so
    assert float(dur) == pytest.approx(veer.plan(str(scen)).duration, rel=1e-12)
    r = subprocess.run([str(env_dir / "bin" / "veer"), "--help"], capture_output=True, text=True, env=env)
    assert r.returncode == 0 and "safety" in r.stdout


def test_message_classes_generated_on_first_use(veer, tmp_path):
    # Without classes in the package or beside the library, the package runs
    # protoc on proto/veer/v1 into its cache folder (VEER_PB_CACHE).
    if shutil.which("protoc") is None:
        pytest.skip("no protoc")
    dst = tmp_path / "pkg"
    shutil.copytree(conftest.REPO / "bindings" / "python" / "veer", dst / "veer",
                    ignore=shutil.ignore_patterns("libveer.so*", "__pycache__", "*_pb2.py"))
    (tmp_path / "lib").mkdir()
    lib = tmp_path / "lib" / "libveer.so"
    shutil.copyfile(veer.library().path, lib)
    env = dict(os.environ, VEER_LIBRARY=str(lib), PYTHONPATH=str(dst), VEER_PB_CACHE=str(tmp_path / "cache"),
               VEER_PROTO_DIR=str(conftest.REPO / "proto"))
    code = ("import sys, veer; p = veer.plan(sys.argv[1]); import veer.v1.plan_pb2 as m; "
            "print(m.__file__); print(p.duration)")
    r = subprocess.run([sys.executable, "-c", code, str(conftest.SCENARIO_DIR / "south_lane1_mecanum.json")],
                       capture_output=True, text=True, env=env, cwd=str(tmp_path))
    assert r.returncode == 0, r.stderr
    where, dur = r.stdout.split()
    assert where.startswith(str(tmp_path / "cache"))
    assert float(dur) == pytest.approx(veer.plan(str(conftest.SCENARIO_DIR / "south_lane1_mecanum.json")).duration)
