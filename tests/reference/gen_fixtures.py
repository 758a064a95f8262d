#!/usr/bin/env python3
"""Regenerates the reference fixtures in tests/fixtures/ from general-purpose libraries.

Needs python3 with numpy and scipy. The Rust tests read the committed JSON files, so the
suite runs without Python; run this script to refresh them:

    python3 tests/reference/gen_fixtures.py

Sources:
- scipy.optimize.linear_sum_assignment (rectangular LSAP optimum);
- GOSPA (alpha = 2) and OSPA computed here from their published definitions
  (Rahmathullah, Garcia-Fernandez, Svensson, FUSION 2017; Schuhmacher, Vo, Vo, IEEE TSP
  2008) on top of scipy's assignment: cost min(d, c)^p, pairs at d >= c unassigned;
- scipy.stats.chi2.ppf for the NEES consistency interval;
- numpy.percentile (default "linear" method);
- shapely distances between the ego footprint rectangle and circles, boxes and polygons;
- scipy.stats.beta quantiles (Clopper-Pearson) and scipy.stats.ks_2samp (exact mode).
"""
import json
import math
import os

import numpy as np
from scipy.optimize import linear_sum_assignment
from scipy.stats import chi2

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "..", "fixtures")
rng = np.random.default_rng(20261202)


def lsap_cases():
    cases = []
    for _ in range(60):
        r = int(rng.integers(1, 12))
        c = int(rng.integers(1, 12))
        cost = rng.uniform(0, 10, size=(r, c))
        rows, cols = linear_sum_assignment(cost)
        cases.append({"rows": r, "cols": c, "cost": cost.ravel().tolist(),
                      "optimum": float(cost[rows, cols].sum())})
    return cases


def gospa_ospa(X, Y, c, p):
    m, n = len(X), len(Y)
    if m == 0 and n == 0:
        return dict(gospa=0.0, loc=0.0, missed=0.0, false=0.0, assigned=0, ospa=0.0)
    if m == 0 or n == 0:
        g = (c ** p / 2 * (m + n)) ** (1 / p)
        return dict(gospa=g, loc=0.0, missed=c ** p / 2 * m, false=c ** p / 2 * n,
                    assigned=0, ospa=c)
    D = np.sqrt(((X[:, None, :] - Y[None, :, :]) ** 2).sum(-1))
    C = np.minimum(D, c) ** p
    rows, cols = linear_sum_assignment(C)
    keep = D[rows, cols] < c
    assigned = int(keep.sum())
    loc = float((D[rows, cols][keep] ** p).sum())
    missed = c ** p / 2 * (m - assigned)
    false = c ** p / 2 * (n - assigned)
    g = (loc + missed + false) ** (1 / p)
    big, small = max(m, n), min(m, n)
    o = ((C[rows, cols].sum() + c ** p * (big - small)) / big) ** (1 / p)
    return dict(gospa=float(g), loc=loc, missed=float(missed), false=float(false),
                assigned=assigned, ospa=float(o))


def gospa_cases():
    cases = []
    for k in range(120):
        m = int(rng.integers(0, 15))
        n = int(rng.integers(0, 15))
        side = float(rng.uniform(3, 40))
        X = rng.uniform(0, side, size=(m, 2))
        Y = rng.uniform(0, side, size=(n, 2))
        c = float(rng.choice([1.0, 2.0, 5.0]))
        p = float(rng.choice([1.0, 2.0, 3.0]))
        r = gospa_ospa(X, Y, c, p)
        cases.append({"x": X.tolist(), "y": Y.tolist(), "c": c, "p": p, **r})
    return cases


def chi2_cases():
    out = []
    for n in [1, 2, 3, 5, 10, 50, 100, 1000, 6341, 10000, 100000]:
        out.append({"n": n, "lower": float(chi2.ppf(0.025, 2 * n) / n),
                    "upper": float(chi2.ppf(0.975, 2 * n) / n)})
    return out


def percentile_cases():
    out = []
    for size in [1, 2, 5, 17, 100, 1001]:
        v = rng.normal(0, 3, size=size)
        out.append({"values": v.tolist(),
                    "p50": float(np.percentile(v, 50)),
                    "p95": float(np.percentile(v, 95)),
                    "p99": float(np.percentile(v, 99))})
    return out


def footprint(x, y, yaw, length=4.0, width=1.8, rear=1.0):
    from shapely.geometry import Polygon
    c, s_ = math.cos(yaw), math.sin(yaw)
    pts = [(-rear, -width / 2), (length - rear, -width / 2), (length - rear, width / 2), (-rear, width / 2)]
    return Polygon([(x + c * u - s_ * v, y + s_ * u + c * v) for u, v in pts])


def box(x, y, yaw, length, width):
    from shapely.geometry import Polygon
    c, s_ = math.cos(yaw), math.sin(yaw)
    pts = [(-length / 2, -width / 2), (length / 2, -width / 2), (length / 2, width / 2), (-length / 2, width / 2)]
    return Polygon([(x + c * u - s_ * v, y + s_ * u + c * v) for u, v in pts])


def clearance_cases():
    from shapely.geometry import Point, Polygon
    out = []
    # Hand-placed: touching, overlapping, far, for each shape; then random ones.
    poses = [(0.0, 0.0, 0.0), (5.0, -2.0, 0.7), (-3.0, 4.0, -2.4)]
    for k in range(90):
        x, y, yaw = poses[k % 3] if k < 9 else (float(rng.uniform(-10, 10)), float(rng.uniform(-10, 10)), float(rng.uniform(-3.1, 3.1)))
        fp = footprint(x, y, yaw)
        kind = ["circle", "box", "polygon"][k % 3]
        cx, cy = x + float(rng.uniform(-8, 8)), y + float(rng.uniform(-8, 8))
        if kind == "circle":
            r = float(rng.uniform(0.1, 2.0))
            d = max(0.0, fp.distance(Point(cx, cy)) - r)
            out.append({"pose": [x, y, yaw], "shape": "circle", "c": [cx, cy], "r": r, "distance": d})
        elif kind == "box":
            l, w, by = float(rng.uniform(0.5, 5)), float(rng.uniform(0.5, 3)), float(rng.uniform(-3, 3))
            d = fp.distance(box(cx, cy, by, l, w))
            out.append({"pose": [x, y, yaw], "shape": "box", "c": [cx, cy], "yaw": by, "length": l, "width": w, "distance": d})
        else:
            # A non-convex L-shaped polygon.
            a = float(rng.uniform(1, 4))
            pts = [(cx, cy), (cx + a, cy), (cx + a, cy + 1), (cx + 1, cy + 1), (cx + 1, cy + a), (cx, cy + a)]
            d = fp.distance(Polygon(pts))
            out.append({"pose": [x, y, yaw], "shape": "polygon", "points": [list(p) for p in pts], "distance": d})
    # Exact touching and overlap cases by construction.
    out.append({"pose": [0.0, 0.0, 0.0], "shape": "circle", "c": [3.5, 0.0], "r": 0.5, "distance": 0.0})
    out.append({"pose": [0.0, 0.0, 0.0], "shape": "box", "c": [1.0, 0.0], "yaw": 0.3, "length": 1.0, "width": 1.0, "distance": 0.0})
    out.append({"pose": [0.0, 0.0, 0.0], "shape": "polygon", "points": [[-5, -5], [5, -5], [5, 5], [-5, 5]], "distance": 0.0})
    return out


def clopper_pearson_cases():
    from scipy.stats import beta
    out = []
    for x, n in [(0, 10), (1, 10), (5, 10), (10, 10), (0, 200), (3, 200), (17, 200), (199, 200), (42, 1000), (0, 5000)]:
        lo = 0.0 if x == 0 else float(beta.ppf(0.025, x, n - x + 1))
        hi = 1.0 if x == n else float(beta.ppf(0.975, x + 1, n - x))
        out.append({"x": x, "n": n, "lower": lo, "upper": hi})
    return out


def ks_cases():
    from scipy.stats import ks_2samp
    out = []
    for n1, n2, shift, ties in [(5, 7, 0.0, False), (20, 20, 0.5, False), (50, 80, 0.2, False), (100, 150, 0.0, True),
                                (300, 200, 0.3, False), (600, 1200, 0.1, False), (1000, 1000, 0.05, True)]:
        a = rng.normal(0, 1, n1)
        b = rng.normal(shift, 1, n2)
        if ties:
            a, b = np.round(a, 1), np.round(b, 1)
        r = ks_2samp(a, b, method="exact")
        out.append({"a": a.tolist(), "b": b.tolist(), "statistic": float(r.statistic), "p_value": float(r.pvalue)})
    return out


def main():
    os.makedirs(OUT, exist_ok=True)
    for name, data in [("lsap.json", lsap_cases()), ("gospa_ospa.json", gospa_cases()),
                       ("chi2.json", chi2_cases()), ("percentiles.json", percentile_cases()),
                       ("clearance.json", clearance_cases()), ("clopper_pearson.json", clopper_pearson_cases()),
                       ("ks.json", ks_cases())]:
        with open(os.path.join(OUT, name), "w") as f:
            json.dump(data, f, indent=None, separators=(",", ":"))
            f.write("\n")
        print("wrote", name)


if __name__ == "__main__":
    main()
