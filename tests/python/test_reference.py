"""Checks of the reference code itself (tests/python/reference.py) against
closed-form results, so that the LP used to judge veer is known to be right.
These tests do not need libveer."""

import math

import numpy as np
import pytest

import reference as ref


def straight(n, length):
    s = np.linspace(0.0, length, n)
    q = [(si, 0.0, 0.0) for si in s]
    dq = [(1.0, 0.0, 0.0)] * n
    ddq = [(0.0, 0.0, 0.0)] * n
    return s, q, dq, ddq


def solve(drive, limits, s, q, dq, ddq, rest):
    rows = [ref.point_rows(drive, limits, q[k], dq[k], ddq[k]) for k in range(len(s))]
    b, _ = ref.solve_lp(s, rows, rows, rest)
    return b, rows


STEERED = {"kind": "steered", "wheel_radius": 0.1,
           "modules": [{"x": 0.3, "y": 0.3}, {"x": -0.3, "y": 0.3}, {"x": -0.3, "y": -0.3}, {"x": 0.3, "y": -0.3}]}


def test_trapezoidal_profile_exact_on_grid():
    # Trapezoidal velocity profile (rest to rest, cruise v, accel A):
    # T = L / v + v / A when L >= v^2 / A (standard kinematics of uniform
    # acceleration). L = 10 m, v = 2 m/s, A = 1 m/s^2: switch points at 2 m and
    # 8 m fall on the 0.01 m grid, so the discretized optimum is the exact one.
    s, q, dq, ddq = straight(1001, 10.0)
    rest = np.zeros(len(s), bool)
    rest[[0, -1]] = True
    b, rows = solve(STEERED, {"body_speed": 2.0, "body_accel": 1.0}, s, q, dq, ddq, rest)
    assert ref.profile_time(s, b) == pytest.approx(10.0 / 2.0 + 2.0 / 1.0, rel=1e-7)
    assert ref.violation(s, b, rows, rows) < 1e-7
    # the tangential face of the polygon has a vertex on the tangent: full A
    assert b[100] == pytest.approx(2.0 * 1.0 * 1.0, rel=1e-7)


def test_triangular_profile_off_grid():
    # Triangular profile: T = 2 sqrt(L / A) when L < v^2 / A. On a grid that
    # misses the switch point the discretized optimum is slower by O(ds).
    s, q, dq, ddq = straight(997, 3.0)
    rest = np.zeros(len(s), bool)
    rest[[0, -1]] = True
    b, _ = solve(STEERED, {"body_speed": 10.0, "body_accel": 0.5}, s, q, dq, ddq, rest)
    t = ref.profile_time(s, b)
    exact = 2.0 * math.sqrt(3.0 / 0.5)
    assert exact <= t < exact * 1.001


def test_wheel_accel_limit_on_straight_line():
    # Translation along x: every steered wheel's tread speed equals the body
    # speed, so wheel_accel 5 rad/s^2 on a 0.1 m wheel is a 0.5 m/s^2 body limit
    # and wheel_rate 10 rad/s a 1 m/s cruise: T = L/v + v/A = 4/1 + 1/0.5.
    s, q, dq, ddq = straight(801, 4.0)
    rest = np.zeros(len(s), bool)
    rest[[0, -1]] = True
    lim = {"modules": [{"wheel_rate": 10.0, "wheel_accel": 5.0}] * 4}
    b, _ = solve(STEERED, lim, s, q, dq, ddq, rest)
    assert ref.profile_time(s, b) == pytest.approx(6.0, rel=1e-7)


def test_intermediate_rest_splits_the_profile():
    # Two 2 m moves with a rest between (a repeated grid position): twice the
    # trapezoid of one move, T = 2 (2/1 + 1/1) with v = 1, A = 1.
    s1 = np.linspace(0.0, 2.0, 201)
    s = np.concatenate([s1, s1[-1:] , s1[1:] + 2.0])
    n = len(s)
    q = [(si, 0.0, 0.0) for si in s]
    dq = [(1.0, 0.0, 0.0)] * n
    ddq = [(0.0, 0.0, 0.0)] * n
    rest = np.zeros(n, bool)
    rest[[0, 200, 201, n - 1]] = True
    b, _ = solve(STEERED, {"body_speed": 1.0, "body_accel": 1.0}, s, q, dq, ddq, rest)
    assert ref.profile_time(s, b) == pytest.approx(2 * (2.0 / 1.0 + 1.0 / 1.0), rel=1e-7)


def test_mecanum_matrix_matches_book():
    # [MR17] eq. (13.10), quoted from memory: with 45-degree rollers,
    # H(0) = (1/r) [[-l-w, 1, -1], [l+w, 1, 1], [l+w, 1, -1], [-l-w, 1, 1]]
    # acting on (wz, vx, vy); reference.wheel_matrix acts on (vx, vy, wz).
    l, w, r = 0.3, 0.25, 0.1
    J = ref.wheel_matrix({"kind": "mecanum", "half_wheelbase": l, "half_track": w, "wheel_radius": r,
                          "roller_angle": math.pi / 4})
    H = np.array([[-l - w, 1, -1], [l + w, 1, 1], [l + w, 1, -1], [-l - w, 1, 1]]) / r
    np.testing.assert_allclose(J[:, [2, 0, 1]], H, atol=1e-12)


def test_omni_matrix_matches_book():
    # [MR17] eq. (13.9), quoted from memory: three omni wheels at distance d,
    # H(0) = (1/r) [[-d, 1, 0], [-d, -1/2, -sin(pi/3)], [-d, -1/2, sin(pi/3)]]
    # on (wz, vx, vy); wheel i pushes along beta_i = 0, 240, 120 degrees and
    # sits at beta_i + 90 degrees.
    d, r = 0.3, 0.05
    mods = []
    for beta in (0.0, 4 * math.pi / 3, 2 * math.pi / 3):
        p = beta + math.pi / 2
        mods.append({"x": d * math.cos(p), "y": d * math.sin(p), "drive_angle": beta})
    J = ref.wheel_matrix({"kind": "omni", "modules": mods, "wheel_radius": r})
    H = np.array([[-d, 1, 0], [-d, -0.5, -math.sin(math.pi / 3)], [-d, -0.5, math.sin(math.pi / 3)]]) / r
    np.testing.assert_allclose(J[:, [2, 0, 1]], H, atol=1e-12)


def test_steer_rate_of_translation_with_turn_matches_finite_difference():
    # The steer-rate row's phi' (d steer / ds) against a central difference of
    # atan2 of the module velocity, on a curve with changing yaw.
    def geom(s):
        q = np.array([s, 0.5 * math.sin(s), 1.3 * s])
        dq = np.array([1.0, 0.5 * math.cos(s), 1.3])
        ddq = np.array([0.0, -0.5 * math.sin(s), 0.0])
        return q, dq, ddq

    rb = np.array([0.3, 0.3])

    def steer(s):
        q, dq, ddq = geom(s)
        p1, _ = ref.module_world_velocity(q, dq, ddq, rb)
        return math.atan2(p1[1], p1[0]) - q[2]

    s0, h = 0.7, 1e-6
    q, dq, ddq = geom(s0)
    p1, p2 = ref.module_world_velocity(q, dq, ddq, rb)
    dphi = (p1[0] * p2[1] - p1[1] * p2[0]) / (p1 @ p1) - dq[2]
    fd = (steer(s0 + h) - steer(s0 - h)) / (2 * h)
    assert dphi == pytest.approx(fd, rel=1e-6)
    # and p'' against a difference of p'
    pa, _ = ref.module_world_velocity(*geom(s0 + h), rb)
    pb, _ = ref.module_world_velocity(*geom(s0 - h), rb)
    np.testing.assert_allclose(p2, (pa - pb) / (2 * h), rtol=1e-6, atol=1e-9)


def test_body_twist_derivative_matches_finite_difference():
    def geom(s):
        return (np.array([math.cos(s), math.sin(2 * s), 0.4 * s * s]),
                np.array([-math.sin(s), 2 * math.cos(2 * s), 0.8 * s]),
                np.array([-math.cos(s), -4 * math.sin(2 * s), 0.8]))

    s0, h = 0.4, 1e-6
    fd = (ref.body_twist(*geom(s0 + h)[:2]) - ref.body_twist(*geom(s0 - h)[:2])) / (2 * h)
    np.testing.assert_allclose(ref.body_twist_ds(*geom(s0)), fd, rtol=1e-6, atol=1e-9)
