"""What each limit allows along a plan's path, computed in numpy from the
path geometry (Plan.path_at) and the limits, for the drawings.

A limit on a quantity that is proportional to sdot (wheel speed, steer rate,
body speed, yaw rate) allows sdot_max = limit / |d quantity / d sdot|. Limits
on accelerations, linear in (sddot, sdot^2), allow the largest sdot^2 for
which some sddot satisfies all of them at once: the maximum velocity curve of
those limits (Bobrow, Dubowsky, Gibson, IJRR 1985; Shin, McKay, IEEE TAC 1985).

Rigid-body kinematics of a body point, v + w x r, and the wheel rates of
omni and mecanum carts follow K. M. Lynch, F. C. Park, "Modern Robotics",
2017, 13.2; differential and skid-steer carts use v -+ (d/2) w with the
effective track d = skid_factor * track_width.
"""

import math

import numpy as np

KINDS = ("wheel_speed", "wheel_accel", "steer_rate", "steer_range", "body_speed", "body_accel", "yaw_rate",
         "yaw_accel", "no_sideways_motion", "stop_at_end", "speed_zone", "traction", "motor_curve", "module_out",
         "start_state", "body_jerk", "wheel_jerk", "none")


def module_positions(drive):
    """Body-frame (x, y) of each module, wheel or side, shape (n, 2)."""
    kind = drive["kind"]
    if kind == "mecanum":
        l, w = drive["half_wheelbase"], drive["half_track"]
        return np.array([[l, w], [l, -w], [-l, -w], [-l, w]], dtype=float)
    if kind == "differential":
        h = 0.5 * drive["track_width"]
        return np.array([[0.0, h], [0.0, -h]])
    return np.array([[m["x"], m["y"]] for m in drive["modules"]], dtype=float).reshape(-1, 2)


def wheel_matrix(drive):
    """Linear drives: J with wheel rates = J (vx, vy, wz), body twist."""
    kind, r = drive["kind"], drive["wheel_radius"]
    if kind == "omni":
        rows = [[math.cos(m["drive_angle"]), math.sin(m["drive_angle"]),
                 m["x"] * math.sin(m["drive_angle"]) - m["y"] * math.cos(m["drive_angle"])] for m in drive["modules"]]
    elif kind == "mecanum":
        t = math.tan(drive["roller_angle"])
        rows = [[1.0, sg * t, sg * t * x - y] for (x, y), sg in zip(module_positions(drive), (-1, 1, -1, 1))]
    elif kind == "differential":
        d = drive["track_width"] * drive["skid_factor"]
        rows = [[1.0, 0.0, -0.5 * d], [1.0, 0.0, 0.5 * d]]
    else:
        raise ValueError("no wheel matrix for a %s drive" % kind)
    return np.array(rows, dtype=float) / r


def _out(drive, i):
    """Module i is out of service (it neither drives nor limits)."""
    mods = drive.get("modules", [])
    return i < len(mods) and bool(mods[i].get("out", False))


def _rot_apply(yaw, v, sign=1.0):
    c, s = np.cos(sign * yaw), np.sin(sign * yaw)
    return np.stack([c * v[:, 0] - s * v[:, 1], s * v[:, 0] + c * v[:, 1]], axis=1)


def _perp(v):
    return np.stack([-v[:, 1], v[:, 0]], axis=1)


def _cap(limit, f):
    f = np.abs(f)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(f > 0, limit / f, np.inf)
    return out if math.isfinite(limit) else np.full(f.shape, np.inf)


def _mvc(alpha, beta, gamma):
    """Largest b per point with some a satisfying alpha a + beta b <= gamma
    for every row (arrays of shape (n, m); gamma > 0, inf rows ignored)."""
    n = alpha.shape[0]
    out = np.full(n, np.inf)
    for k in range(n):
        a, b, g = alpha[k], beta[k], gamma[k]
        ok = np.isfinite(g)
        a, b, g = a[ok], b[ok], g[ok]
        tiny = np.abs(a) <= 1e-12 * (np.abs(b) + np.abs(g))
        xb = [gg / bb for bb, gg in zip(b[tiny], g[tiny]) if bb > 0]
        up, lo = ~tiny & (a > 0), ~tiny & (a < 0)
        if up.any() and lo.any():
            c0 = (g[up] / a[up])[:, None] - (g[lo] / a[lo])[None, :]
            sl = (b[up] / a[up])[:, None] - (b[lo] / a[lo])[None, :]
            pos = sl > 0
            if pos.any():
                xb.append(float(np.min(c0[pos] / sl[pos])))
        if xb:
            out[k] = max(min(xb), 0.0)
    return out


def limit_curves(drive, limits, q, dq, ddq, polygon_sides=32):
    """sdot_max along the path for each limit, from samples q, q', q'' (arrays
    of shape (n, 3)). Returns a dict name -> array (inf where the limit does
    not bound sdot): "body_speed", "yaw_rate", "wheel_speed[i]",
    "steer_rate[i]", and the acceleration limits' curves "wheel_accel",
    "body_accel", "yaw_accel"."""
    q, dq, ddq = (np.asarray(v, dtype=float).reshape(-1, 3) for v in (q, dq, ddq))
    n = len(q)
    yaw, w, dw = q[:, 2], dq[:, 2], ddq[:, 2]
    c1, c2 = dq[:, :2], ddq[:, :2]
    out = {}
    sp = np.hypot(c1[:, 0], c1[:, 1])
    out["body_speed"] = _cap(limits["body_speed"], sp)
    out["yaw_rate"] = _cap(limits["yaw_rate"], w)
    acc = {"wheel_accel": [], "body_accel": [], "yaw_accel": []}
    mods = limits["modules"]
    r = drive["wheel_radius"]
    if drive["kind"] == "steered":
        for i, rb in enumerate(module_positions(drive)):
            if _out(drive, i):
                continue
            Rr = _rot_apply(yaw, np.tile(rb, (n, 1)))
            p1 = c1 + w[:, None] * _perp(Rr)
            p2 = c2 + dw[:, None] * _perp(Rr) - (w * w)[:, None] * Rr
            v = np.hypot(p1[:, 0], p1[:, 1])
            out["wheel_speed[%d]" % i] = _cap(mods[i]["wheel_rate"], v / r)
            with np.errstate(divide="ignore", invalid="ignore"):
                dphi = np.where(v > 1e-9, (p1[:, 0] * p2[:, 1] - p1[:, 1] * p2[:, 0]) / (v * v) - w, 0.0)
                dv = np.where(v > 1e-9, (p1 * p2).sum(axis=1) / v, np.hypot(p2[:, 0], p2[:, 1]))
            out["steer_rate[%d]" % i] = _cap(mods[i]["steer_rate"], dphi)
            acc["wheel_accel"].append((v / r, dv / r, mods[i]["wheel_accel"]))
    else:
        J = wheel_matrix(drive)
        gb = _rot_apply(yaw, c1, -1.0)
        hb = _rot_apply(yaw, c2, -1.0) - w[:, None] * _perp(gb)
        xi = np.column_stack([gb, w])
        dxi = np.column_stack([hb, dw])
        for i in range(J.shape[0]):
            if _out(drive, i):
                continue
            f, df = xi @ J[i], dxi @ J[i]
            out["wheel_speed[%d]" % i] = _cap(mods[i]["wheel_rate"], f)
            acc["wheel_accel"].append((f, df, mods[i]["wheel_accel"]))
    A = limits["body_accel"]
    if math.isfinite(A):
        with np.errstate(divide="ignore", invalid="ignore"):
            t = np.where(sp[:, None] > 0, c1 / sp[:, None], np.array([1.0, 0.0]))
        nrm = _perp(t)
        at_x, an_x = (c2 * t).sum(axis=1), (c2 * nrm).sum(axis=1)
        rad = A * math.cos(math.pi / polygon_sides)
        for j in range(polygon_sides):
            ang = (2 * j + 1) * math.pi / polygon_sides
            acc["body_accel"].append((math.cos(ang) * sp, math.cos(ang) * at_x + math.sin(ang) * an_x, rad, True))
    acc["yaw_accel"].append((w, dw, limits["yaw_accel"]))
    for name, rows in acc.items():
        al, be, ga = [], [], []
        for row in rows:
            fa, fb, lim = row[:3]
            if not math.isfinite(lim):
                continue
            if len(row) == 4:  # a one-sided row (polygon face)
                al.append(fa), be.append(fb), ga.append(np.full(n, lim))
            else:
                al += [fa, -fa]
                be += [fb, -fb]
                ga += [np.full(n, lim)] * 2
        if al:
            b = _mvc(np.column_stack(al), np.column_stack(be), np.column_stack(ga))
            out[name] = np.sqrt(b)
    return out


def by_kind(curves):
    """The tightest curve of each limit kind: {"wheel_speed": min over modules, ...}."""
    out = {}
    for name, c in curves.items():
        kind = name.split("[")[0]
        out[kind] = c if kind not in out else np.minimum(out[kind], c)
    return out
