"""veer's polygon maths (include/veer/range.h) against Shapely, Debian's
general-purpose geometry library (python3-shapely, GEOS underneath), on
random polygons and footprints: containment, distance to the boundary,
distance between areas, validity (self-intersection), and the signed
clearance that the range checks report (distances exactly; violation depths
against a dense sampling of the overlap, with its stated bound).

Calls the shared library's public functions through ctypes, declared here
(not through the binding), so this suite checks the C geometry alone.
SPDX-License-Identifier: MIT
"""

import ctypes
import math
import os
import pathlib
import random

import numpy as np
import pytest

shapely_geometry = pytest.importorskip("shapely.geometry")  # python3-shapely, listed in tests/run.sh
from shapely.geometry import Point, Polygon  # noqa: E402
from shapely import vectorized  # noqa: E402

MAX_VERTICES = 64  # VEER_MAX_OUTLINE_VERTICES, include/veer/range.h
OK, ERR_VALUE, ERR_GEOMETRY = 0, 2, 4


class Outline(ctypes.Structure):
    _fields_ = [("count", ctypes.c_int), ("points", (ctypes.c_double * 2) * MAX_VERTICES)]


def _library_path():
    env = os.environ.get("VEER_LIBRARY")
    if env:
        return env
    repo = pathlib.Path(__file__).resolve().parents[2]
    for sub in ("build/ci", "build"):
        p = repo / sub / "libveer.so"
        if p.is_file():
            return str(p)
    pytest.fail("libveer.so not found: set VEER_LIBRARY (tests/run.sh does)")


@pytest.fixture(scope="module")
def lib():
    dll = ctypes.CDLL(_library_path())
    O = ctypes.POINTER(Outline)
    D = ctypes.c_double
    dll.veer_outline_check.argtypes = [O, ctypes.c_void_p]
    dll.veer_outline_contains.argtypes = [O, D, D, ctypes.POINTER(ctypes.c_int)]
    dll.veer_outline_point_distance.argtypes = [O, D, D, ctypes.POINTER(D)]
    dll.veer_outline_distance.argtypes = [O, O, ctypes.POINTER(D)]
    dll.veer_outline_clearance.argtypes = [O, O, ctypes.c_int, ctypes.POINTER(D)]
    for name in ("veer_outline_check", "veer_outline_contains", "veer_outline_point_distance",
                 "veer_outline_distance", "veer_outline_clearance"):
        getattr(dll, name).restype = ctypes.c_int
    return dll


def outline(pts):
    o = Outline()
    o.count = len(pts)
    for i, (x, y) in enumerate(pts):
        o.points[i][0] = x
        o.points[i][1] = y
    return o


# ---- random shapes (invented) ---------------------------------------------------

def star_polygon(rng, cx, cy, r_lo, r_hi, n):
    """A simple polygon, usually not convex: n vertices at increasing
    random angles (one per n-th of a turn) about (cx, cy), random radii."""
    angles = [2.0 * math.pi * (i + 0.8 * rng.random()) / n for i in range(n)]  # increasing, within one turn
    return [(cx + r * math.cos(a), cy + r * math.sin(a))
            for a, r in ((a, rng.uniform(r_lo, r_hi)) for a in angles)]


def rectangle(rng, cx, cy):
    """A footprint-sized rectangle, rotated."""
    L, W, yaw = rng.uniform(0.4, 1.6), rng.uniform(0.3, 1.0), rng.uniform(-math.pi, math.pi)
    c, s = math.cos(yaw), math.sin(yaw)
    return [(cx + c * x - s * y, cy + s * x + c * y)
            for x, y in ((L / 2, W / 2), (-L / 2, W / 2), (-L / 2, -W / 2), (L / 2, -W / 2))]


def area_and_footprint(rng):
    area = star_polygon(rng, 0.0, 0.0, rng.uniform(0.5, 2.0), rng.uniform(2.0, 4.0), rng.randint(3, 40))
    # footprints near the area's boundary, inside or outside: all relations occur
    bx, by = area[rng.randrange(len(area))]
    cx, cy = bx + rng.uniform(-1.0, 1.0), by + rng.uniform(-1.0, 1.0)
    fp = rectangle(rng, cx, cy) if rng.random() < 0.6 else star_polygon(rng, cx, cy, 0.2, 0.9, rng.randint(3, 9))
    return area, fp


# ---- checks ---------------------------------------------------------------------------

def test_containment_and_boundary_distance(lib):
    """Point in polygon and distance to the boundary vs Shapely on 200 random
    polygons, 40 points each (points within 1e-9 m of the boundary are left
    out of the containment comparison: either answer is right there)."""
    rng = random.Random(6001)
    inside = ctypes.c_int()
    dist = ctypes.c_double()
    n_in = 0
    for _ in range(200):
        pts = star_polygon(rng, rng.uniform(-50, 50), rng.uniform(-50, 50), 0.3, 3.0, rng.randint(3, 64))
        poly = Polygon(pts)
        assert poly.is_valid
        o = outline(pts)
        xmin, ymin, xmax, ymax = poly.bounds
        for _ in range(40):
            x, y = rng.uniform(xmin - 1, xmax + 1), rng.uniform(ymin - 1, ymax + 1)
            p = Point(x, y)
            ref_d = poly.exterior.distance(p)
            assert lib.veer_outline_point_distance(ctypes.byref(o), x, y, ctypes.byref(dist)) == OK
            assert abs(dist.value - ref_d) <= 1e-9 * (1 + ref_d)
            assert lib.veer_outline_contains(ctypes.byref(o), x, y, ctypes.byref(inside)) == OK
            if ref_d > 1e-9:
                assert inside.value == int(poly.contains(p)), (pts, x, y)
                n_in += inside.value
    assert 1000 < n_in < 7000  # both answers occur often


def test_distance_between_areas(lib):
    """Distance between two areas (0 when they overlap) vs Shapely's
    Polygon.distance on 400 random pairs."""
    rng = random.Random(6002)
    d = ctypes.c_double()
    zero = 0
    for _ in range(400):
        area, fp = area_and_footprint(rng)
        a, b = outline(area), outline(fp)
        ref = Polygon(area).distance(Polygon(fp))
        assert lib.veer_outline_distance(ctypes.byref(a), ctypes.byref(b), ctypes.byref(d)) == OK
        assert abs(d.value - ref) <= 1e-9 * (1 + ref), (area, fp)
        zero += ref == 0.0
    assert 50 < zero < 350


def test_validity_matches_shapely(lib):
    """Shuffled vertex orders usually cross themselves: veer refuses exactly
    the outlines Shapely calls invalid (ERR_GEOMETRY), accepts the rest."""
    rng = random.Random(6003)
    bad = 0
    for _ in range(400):
        pts = star_polygon(rng, 0.0, 0.0, 0.5, 3.0, rng.randint(4, 12))
        if rng.random() < 0.7:
            i, j = rng.sample(range(len(pts)), 2)
            pts[i], pts[j] = pts[j], pts[i]
        st = lib.veer_outline_check(ctypes.byref(outline(pts)), None)
        valid = Polygon(pts).is_valid
        assert st == (OK if valid else ERR_GEOMETRY), (pts, st)
        bad += not valid
    assert 100 < bad < 350
    assert lib.veer_outline_check(ctypes.byref(outline([(0, 0), (1, 0)])), None) == ERR_VALUE
    assert lib.veer_outline_check(ctypes.byref(outline([(0, 0), (float("nan"), 0), (1, 1)])), None) == ERR_VALUE


def _sampled_depth(region, f, h):
    """Largest f over a grid of spacing h inside region and samples every h
    along its boundary: within h / sqrt(2) + h / 2 of the true maximum
    (f is 1-Lipschitz; any point of the region is that close to a sample)."""
    best = 0.0
    geoms = getattr(region, "geoms", [region])
    for g in geoms:
        if g.geom_type != "Polygon" or g.is_empty:
            continue
        xmin, ymin, xmax, ymax = g.bounds
        xs, ys = np.meshgrid(np.arange(xmin, xmax + h, h), np.arange(ymin, ymax + h, h))
        mask = vectorized.contains(g, xs, ys)
        pts = list(zip(xs[mask], ys[mask]))
        for ring in [g.exterior] + list(g.interiors):
            n = max(2, int(math.ceil(ring.length / h)))
            pts += [ring.interpolate(i * ring.length / n).coords[0] for i in range(n)]
        for x, y in pts:
            best = max(best, f(Point(x, y)))
    return best


def test_clearance_against_keep_out_and_keep_in(lib):
    """The signed clearance of range.h on 120 random area/footprint pairs,
    as keep-out and as keep-in: when clear, the distance Shapely gives
    (to 1e-9); when violated, the depth, which must agree with Shapely's
    dense sampling of the overlap (F & O, or F - K) within its bound."""
    rng = random.Random(6004)
    c = ctypes.c_double()
    h = 0.01
    bound = h / math.sqrt(2) + h / 2 + 1e-9
    seen = {"out_clear": 0, "out_viol": 0, "in_clear": 0, "in_viol": 0}
    for _ in range(120):
        area, fp = area_and_footprint(rng)
        A, F = Polygon(area), Polygon(fp)
        a, f = outline(area), outline(fp)
        # keep-out: F must stay outside A
        assert lib.veer_outline_clearance(ctypes.byref(f), ctypes.byref(a), 0, ctypes.byref(c)) == OK
        if F.intersection(A).area > 1e-12:
            ref = _sampled_depth(F.intersection(A), lambda p: A.exterior.distance(p), h)
            assert -c.value >= ref - 1e-9 and -c.value <= ref + bound, (area, fp, c.value, ref)
            seen["out_viol"] += 1
        elif F.distance(A) > 1e-9:
            assert abs(c.value - F.distance(A)) <= 1e-9, (area, fp)
            seen["out_clear"] += 1
        # keep-in: F must stay inside A
        assert lib.veer_outline_clearance(ctypes.byref(f), ctypes.byref(a), 1, ctypes.byref(c)) == OK
        outside = F.difference(A)
        if outside.area > 1e-12:
            ref = _sampled_depth(outside, lambda p: p.distance(A), h)
            assert -c.value >= ref - 1e-9 and -c.value <= ref + bound, (area, fp, c.value, ref)
            seen["in_viol"] += 1
        elif A.contains(F) and A.exterior.distance(F) > 1e-9:
            assert abs(c.value - A.exterior.distance(F)) <= 1e-9, (area, fp)
            seen["in_clear"] += 1
    assert min(seen.values()) >= 10, seen
