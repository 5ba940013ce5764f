"""Independent references for the pytest suites: rigid-body and wheel
kinematics in numpy, the TOPP constraint rows built from them, and the
discretized time-optimal problem solved as a linear program with scipy's HiGHS.

Nothing here calls libveer: the inputs are path samples q, q', q'' (which the
tests take from Plan.path_at) and the drive and limits as plain dicts with the
field names of include/veer/drive.h and plan.h.

Sources:
  [LP09]  D. Verscheure, B. Demeulenaere, J. Swevers, J. De Schutter, M. Diehl,
          "Time-Optimal Path Tracking for Robots: A Convex Optimization
          Approach", IEEE Trans. Automatic Control 54(10), 2009: in the
          variables b = sdot^2 and a = sddot the path-constrained problem is
          convex; with b' = 2a along the path and linear limits it is an LP.
  [RA18]  H. Pham, Q.-C. Pham, "A New Approach to Time-Optimal Path
          Parameterization Based on Reachability Analysis", IEEE T-RO 34(3),
          2018: the discretization (constant a on each interval,
          b_{k+1} = b_k + 2 ds a_k) and the first-order interpolation scheme
          (an interval's acceleration rows hold at both of its ends).
  [MR17]  K. M. Lynch, F. C. Park, "Modern Robotics", Cambridge 2017, 13.2:
          wheel rates of omni and mecanum carts, u_i = (1/r)[1, tan g_i]
          R(-b_i) [[-y_i, 1, 0], [x_i, 0, 1]] (wz, vx, vy); rigid-body velocity
          of a point v + w x r.
  [SIC08] B. Siciliano, L. Sciavicco, L. Villani, G. Oriolo, "Robotics:
          Modelling, Planning and Control", Springer 2009, 11.2: unicycle /
          differential drive, wheel speeds v -+ (d/2) w.
"""

import math

import numpy as np
import scipy.optimize
import scipy.sparse

# ---------------------------------------------------------------------------
# kinematics


def rot(a):
    c, s = math.cos(a), math.sin(a)
    return np.array([[c, -s], [s, c]])


JROT = np.array([[0.0, -1.0], [1.0, 0.0]])  # 90-degree rotation: k x (.)


def module_positions(drive):
    """Body-frame (x, y) of each module or wheel, and the kind's module count."""
    kind = drive["kind"]
    if kind in ("steered", "omni"):
        return np.array([[m["x"], m["y"]] for m in drive["modules"]], dtype=float)
    if kind == "mecanum":
        l, w = drive["half_wheelbase"], drive["half_track"]
        # [MR17] fig. 13.5 order: front-left, front-right, rear-right, rear-left
        return np.array([[l, w], [l, -w], [-l, -w], [-l, w]], dtype=float)
    if kind == "differential":
        h = 0.5 * drive["track_width"]
        return np.array([[0.0, h], [0.0, -h]])
    raise ValueError(kind)


def wheel_matrix(drive):
    """Linear drives: rows J_i with wheel rate u_i = J_i . (vx, vy, wz), body twist.

    Omni and mecanum from [MR17] eq. (13.5)/(13.10); differential from [SIC08]
    with the skid-steer effective track skid_factor * track_width."""
    kind = drive["kind"]
    r = drive["wheel_radius"]
    rows = []
    if kind == "omni":
        for m in drive["modules"]:
            x, y, b = m["x"], m["y"], m["drive_angle"]
            # u = (1/r) [cos b, sin b] . (vx - y wz, vy + x wz)   ([MR17], gamma = 0)
            rows.append([math.cos(b), math.sin(b), -y * math.cos(b) + x * math.sin(b)])
    elif kind == "mecanum":
        g = drive["roller_angle"]
        pos = module_positions(drive)
        for (x, y), sg in zip(pos, (-1.0, 1.0, -1.0, 1.0)):
            t = math.tan(sg * g)
            # u = (1/r) [1, tan g] . (vx - y wz, vy + x wz)   ([MR17], beta = 0)
            rows.append([1.0, t, -y + t * x])
    elif kind == "differential":
        d = drive["track_width"] * drive.get("skid_factor", 1.0)
        rows.append([1.0, 0.0, -0.5 * d])  # left side
        rows.append([1.0, 0.0, 0.5 * d])   # right side
    else:
        raise ValueError("no wheel matrix for %s" % kind)
    return np.array(rows) / r


def body_twist(q, dq):
    """Body twist per unit sdot: (R(-yaw) c', yaw')."""
    g = rot(-q[2]) @ dq[:2]
    return np.array([g[0], g[1], dq[2]])


def body_twist_ds(q, dq, ddq):
    """d/ds of body_twist: R(-yaw) c'' - yaw' J R(-yaw) c'."""
    g = rot(-q[2]) @ dq[:2]
    h = rot(-q[2]) @ ddq[:2] - dq[2] * (JROT @ g)
    return np.array([h[0], h[1], ddq[2]])


def module_world_velocity(q, dq, ddq, r_body):
    """World velocity p' of a point fixed at r_body on the body, per unit sdot,
    and its s-derivative p'' (rigid body, [MR17] 13.2)."""
    Rr = rot(q[2]) @ r_body
    p1 = dq[:2] + dq[2] * (JROT @ Rr)
    p2 = ddq[:2] + ddq[2] * (JROT @ Rr) - dq[2] ** 2 * Rr
    return p1, p2


# ---------------------------------------------------------------------------
# constraint rows


class Rows:
    """Rows at one path position: speed rows as an x bound (b <= xmax) and
    acceleration rows alpha * a + beta * b <= gamma."""

    def __init__(self):
        self.xmax = math.inf
        self.xmax_name = "none"
        self.steer_bounds = {}  # module -> its steer-rate bound on b
        self.alpha, self.beta, self.gamma, self.names = [], [], [], []

    def speed(self, f, limit, name):
        """|f| sdot <= limit."""
        if math.isfinite(limit) and f * f > 0.0:
            x = limit * limit / (f * f)
            if x < self.xmax:
                self.xmax, self.xmax_name = x, name

    def accel(self, fa, fb, limit, name):
        """|fa a + fb b| <= limit as two rows."""
        if not math.isfinite(limit):
            return
        for sgn in (1.0, -1.0):
            self.alpha.append(sgn * fa)
            self.beta.append(sgn * fb)
            self.gamma.append(limit)
            self.names.append(name)

    def row(self, fa, fb, c, name):
        self.alpha.append(fa)
        self.beta.append(fb)
        self.gamma.append(c)
        self.names.append(name)


def polygon_rows(R, c1, c2, A, n_sides, name):
    """|c1 a + c2 b| <= A for a point with world path derivatives c1, c2: the
    circle replaced by the regular polygon with n_sides sides inscribed in it,
    oriented in the point's tangent frame with a vertex on the tangent (faces
    at angles (2j+1) pi / n, distance A cos(pi / n))."""
    sp = float(np.hypot(*c1))
    if not math.isfinite(A) or not (sp > 0.0 or np.hypot(*c2) > 0.0):
        return
    t = c1 / sp if sp > 0.0 else np.array([1.0, 0.0])
    n = JROT @ t
    n_sides = int(n_sides)
    rad = A * math.cos(math.pi / n_sides)
    for j in range(n_sides):
        ang = (2 * j + 1) * math.pi / n_sides
        # direction d = cos(ang) t + sin(ang) n; acc . d <= rad
        R.row(math.cos(ang) * sp, math.cos(ang) * float(c2 @ t) + math.sin(ang) * float(c2 @ n), rad, name)


G0 = 9.80665  # m/s^2, standard gravity (3rd CGPM, 1901)


def point_rows(drive, limits, q, dq, ddq, polygon_sides=32, still=1e-9, traction_sides=16):
    """Every limit at one path position, from the geometry and the limits alone.

    Body acceleration: the circle |c' a + c'' b| <= A is replaced by the
    regular polygon with polygon_sides sides inscribed in it, oriented in the
    path's tangent frame with a vertex on the tangent (faces at angles
    (2j+1) pi / n, distance A cos(pi / n)): veer's formulation of the same
    limit, so that the LP solves the same discretized problem."""
    q, dq, ddq = (np.asarray(v, dtype=float) for v in (q, dq, ddq))
    R = Rows()
    c1, c2 = dq[:2], ddq[:2]
    sp = float(np.hypot(*c1))
    R.speed(sp, limits.get("body_speed", math.inf), "body_speed")
    R.speed(dq[2], limits.get("yaw_rate", math.inf), "yaw_rate")
    polygon_rows(R, c1, c2, limits.get("body_accel", math.inf), polygon_sides, "body_accel")
    R.accel(dq[2], ddq[2], limits.get("yaw_accel", math.inf), "yaw_accel")

    mods = limits.get("modules", [])
    kind = drive["kind"]
    if kind == "steered":
        r = drive["wheel_radius"]
        for i, rb in enumerate(module_positions(drive)):
            ml = mods[i] if i < len(mods) else {}
            p1, p2 = module_world_velocity(q, dq, ddq, rb)
            v = float(np.hypot(*p1))
            R.speed(v / r, ml.get("wheel_rate", math.inf), "wheel_speed[%d]" % i)
            if v > still:
                # steer relative to the body: phi = atan2(p') - yaw, so
                # phi' = (p' x p'') / |p'|^2 - yaw'
                dphi = (p1[0] * p2[1] - p1[1] * p2[0]) / (v * v) - dq[2]
                R.speed(dphi, ml.get("steer_rate", math.inf), "steer_rate[%d]" % i)
                w = ml.get("steer_rate", math.inf)
                if math.isfinite(w) and dphi != 0.0:
                    R.steer_bounds[i] = w * w / (dphi * dphi)
                e = p1 / v
            else:
                d = float(np.hypot(*p2))
                e = p2 / d if d > 0 else np.array([1.0, 0.0])
            # wheel tread speed along e: (p'.e) sdot; its rate (p'.e) a + (p''.e) b
            R.accel(float(p1 @ e) / r, float(p2 @ e) / r, ml.get("wheel_accel", math.inf), "wheel_accel[%d]" % i)
    else:
        J = wheel_matrix(drive)
        xi = body_twist(q, dq)
        dxi = body_twist_ds(q, dq, ddq)
        for i in range(J.shape[0]):
            ml = mods[i] if i < len(mods) else {}
            f, df = float(J[i] @ xi), float(J[i] @ dxi)
            R.speed(f, ml.get("wheel_rate", math.inf), "wheel_speed[%d]" % i)
            R.accel(f, df, ml.get("wheel_accel", math.inf), "wheel_accel[%d]" % i)
    # Traction: the contact point's acceleration p' a + p'' b (centripetal part
    # included) within mu g (friction: any physics text), as a polygon.
    for i, rb in enumerate(module_positions(drive)):
        ml = mods[i] if i < len(mods) else {}
        mu = ml.get("traction_mu", math.inf)
        if math.isfinite(mu):
            p1, p2 = module_world_velocity(q, dq, ddq, rb)
            polygon_rows(R, p1, p2, mu * G0, traction_sides, "traction[%d]" % i)
    return R


# ---------------------------------------------------------------------------
# the LP


def profile_time(s, b):
    """Moving time of a profile on a grid with constant sddot per interval:
    dt = 2 ds / (sqrt(b_k) + sqrt(b_k+1)) (exact for constant acceleration)."""
    s = np.asarray(s, dtype=float)
    b = np.maximum(np.asarray(b, dtype=float), 0.0)
    ds = np.diff(s)
    den = np.sqrt(b[:-1]) + np.sqrt(b[1:])
    keep = ds > 0.0
    if np.any(den[keep] <= 0.0):
        return math.inf
    return float(np.sum(2.0 * ds[keep] / den[keep]))


def hold_steer_to_neighbours(s, rows_right, rows_left):
    """The rule veer states for steer-rate bounds (plan.c, steer_rate_bounds):
    b at a point is held to the lowest steer-rate bound of the point and its
    neighbours within the same rest-to-rest piece, so that b, linear in s
    between grid points, stays below a bound that is monotone across each
    interval. Applied to the bounds of both sides of each point."""
    n = len(s)
    ds = np.diff(np.asarray(s, dtype=float))
    held = []
    for k in range(n):
        lo = math.inf
        for nb_, ok in ((k - 1, k > 0 and ds[k - 1] > 0.0), (k + 1, k + 1 < n and ds[k] > 0.0)):
            if ok:
                side = rows_left[nb_] if nb_ < k else rows_right[nb_]
                for b in side.steer_bounds.values():
                    lo = min(lo, b)
        held.append(lo)
    for k in range(n):
        for r in (rows_right[k], rows_left[k]):
            if held[k] < r.xmax:
                r.xmax, r.xmax_name = held[k], "steer_rate (neighbour)"


def solve_lp(s, rows_right, rows_left, rest):
    """Time-optimal profile on the grid s as an LP in (b, a) [LP09] with the
    discretization of [RA18].

    s:          grid path positions, non-decreasing; a repeated position is a
                rest shared by two rest-to-rest pieces (no interval between).
    rows_right: Rows at each point with the geometry of the interval that
                starts there (used with a_k and b_k);
    rows_left:  Rows at each point with the geometry of the interval that
                ends there (used with a_{k-1} and b_k);
    rest:       bool per point, b = 0 there.
    Objective: maximise the ds-weighted sum of b. The discretized problem's
    optimum is the componentwise-largest feasible profile [RA18], which
    maximises any positive weighting of b and minimises the time.
    Returns (b, result)."""
    s = np.asarray(s, dtype=float)
    n = len(s)
    ds = np.diff(s)
    iv = np.nonzero(ds > 0.0)[0]  # intervals that exist
    m = len(iv)
    nb = n
    # variables: b_0..b_{n-1}, then a_j for each interval j in iv
    A_rows, A_cols, A_vals, ub = [], [], [], []
    r = 0
    for j, k in enumerate(iv):
        for side, pt in ((rows_right[k], k), (rows_left[k + 1], k + 1)):
            for al, be, ga in zip(side.alpha, side.beta, side.gamma):
                A_rows += [r, r]
                A_cols += [nb + j, pt]
                A_vals += [al, be]
                ub.append(ga)
                r += 1
    A_ub = scipy.sparse.csr_matrix((A_vals, (A_rows, A_cols)), shape=(r, nb + m))
    E_rows, E_cols, E_vals = [], [], []
    for j, k in enumerate(iv):
        E_rows += [j, j, j]
        E_cols += [k + 1, k, nb + j]
        E_vals += [1.0, -1.0, -2.0 * ds[k]]
    A_eq = scipy.sparse.csr_matrix((E_vals, (E_rows, E_cols)), shape=(m, nb + m))
    b_eq = np.zeros(m)
    bounds = []
    for k in range(n):
        hi = min(rows_right[k].xmax, rows_left[k].xmax)
        if rest[k]:
            hi = 0.0
        bounds.append((0.0, hi if math.isfinite(hi) else None))
    bounds += [(None, None)] * m
    w = np.zeros(nb + m)
    dsp = np.concatenate([[0.0], ds]) + np.concatenate([ds, [0.0]])
    w[:nb] = -0.5 * dsp
    res = scipy.optimize.linprog(w, A_ub=A_ub, b_ub=np.asarray(ub), A_eq=A_eq, b_eq=b_eq, bounds=bounds,
                                 method="highs")
    if res.status != 0:
        raise RuntimeError("LP failed: %s" % res.message)
    return np.maximum(res.x[:nb], 0.0), res


def violation(s, b, rows_right, rows_left):
    """Largest relative violation of the rows by profile b (a from the b
    differences): max over rows of (alpha a + beta b - gamma) / gamma and of
    (b - xmax) / xmax. <= 0 means feasible."""
    s = np.asarray(s, dtype=float)
    b = np.asarray(b, dtype=float)
    worst = -math.inf
    for k in range(len(s)):
        for R in (rows_right[k], rows_left[k]):
            if math.isfinite(R.xmax) and R.xmax > 0:
                worst = max(worst, (b[k] - R.xmax) / R.xmax)
    for k in range(len(s) - 1):
        ds = s[k + 1] - s[k]
        if ds <= 0:
            continue
        a = (b[k + 1] - b[k]) / (2 * ds)
        for R, bb in ((rows_right[k], b[k]), (rows_left[k + 1], b[k + 1])):
            for al, be, ga in zip(R.alpha, R.beta, R.gamma):
                worst = max(worst, (al * a + be * bb - ga) / ga)
    return worst
