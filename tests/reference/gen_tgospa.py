#!/usr/bin/env python3
"""Regenerates tests/fixtures/tgospa.json: T-GOSPA cases solved outside the project.

Needs python3 with numpy and scipy. The Rust test (tests/reference_fixtures.rs) reads the
committed JSON, so the suite runs without Python; run this script to refresh it:

    python3 tests/reference/gen_tgospa.py

For each random case (up to 6 trajectories a side, up to 8 steps, with births, deaths and
gaps), two independent answers:
- `lp`: the linear-programming relaxation of T-GOSPA^p (Garcia-Fernandez, Rahmathullah,
  Svensson, IEEE TSP 2020, Section IV, alpha = 2), built here in full (every pair, every
  step, no pruning and no split into components) and solved with
  scipy.optimize.linprog(method="highs");
- `integral`: where small enough, T-GOSPA^p itself (integral assignments only) by
  exhaustive enumeration: every assignment of every step (each reference to one estimate
  or to none, no estimate twice), chained by dynamic programming over the steps with the
  switch costs between consecutive assignments, so every sequence is covered.
Costs: a pair of present states min(d^p, missed + false), a state left alone `missed`
(reference) or `false` (estimate), a full switch gamma^p, a half switch gamma^p / 2. A
quarter of the cases cost missed and false objects differently (the quasi-metric).
"""
import itertools
import json
import math
import os

import numpy as np
from scipy.optimize import linprog
from scipy.sparse import lil_matrix

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "..", "fixtures", "tgospa.json")
rng = np.random.default_rng(20261203)


def trajectory(T):
    """A trajectory present from a birth to a death, with a gap now and then."""
    birth = int(rng.integers(0, T))
    death = int(rng.integers(birth, T))
    pos = rng.uniform(0, 6, size=2)
    vel = rng.uniform(-1, 1, size=2)
    states = []
    for k in range(T):
        if birth <= k <= death and rng.uniform() > 0.15:
            states.append([float(v) for v in np.round(pos + vel * k, 6)])
        else:
            states.append(None)
    return states


def estimate_of(x, T):
    """An estimate near a reference (noisy, perhaps shorter), or a free one."""
    if x is None or rng.uniform() < 0.3:
        return trajectory(T)
    out = []
    for s in x:
        if s is None or rng.uniform() < 0.15:
            out.append(None)
        else:
            out.append([float(v) for v in np.round(np.array(s) + rng.normal(0, 0.6, 2), 6)])
    return out


def pair_cost(a, b, p, m, f):
    if a is not None and b is not None:
        d = math.hypot(a[0] - b[0], a[1] - b[1]) ** p
        return min(d, m + f)
    if a is not None:
        return m
    if b is not None:
        return f
    return 0.0


def lp_value(X, Y, T, p, m, f, g):
    nx, ny = len(X), len(Y)
    # Variable layout: per step W (nx * ny), u (nx), v (ny); then e per step gap (nx * ny).
    per = nx * ny + nx + ny
    nw = T * per
    ne = (T - 1) * nx * ny
    n = nw + ne
    if n == 0:
        return 0.0
    c = np.zeros(n)
    W = lambda k, i, j: k * per + i * ny + j
    U = lambda k, i: k * per + nx * ny + i
    V = lambda k, j: k * per + nx * ny + nx + j
    E = lambda k, i, j: nw + k * nx * ny + i * ny + j
    for k in range(T):
        for i in range(nx):
            for j in range(ny):
                c[W(k, i, j)] = pair_cost(X[i][k], Y[j][k], p, m, f)
            c[U(k, i)] = m if X[i][k] is not None else 0.0
        for j in range(ny):
            c[V(k, j)] = f if Y[j][k] is not None else 0.0
    for k in range(T - 1):
        for i in range(nx):
            for j in range(ny):
                c[E(k, i, j)] = g / 2.0
    A_eq = lil_matrix((T * (nx + ny), n))
    b_eq = np.ones(T * (nx + ny))
    r = 0
    for k in range(T):
        for i in range(nx):
            for j in range(ny):
                A_eq[r, W(k, i, j)] = 1
            A_eq[r, U(k, i)] = 1
            r += 1
        for j in range(ny):
            for i in range(nx):
                A_eq[r, W(k, i, j)] = 1
            A_eq[r, V(k, j)] = 1
            r += 1
    A_ub = lil_matrix((max(1, 2 * ne), n))
    b_ub = np.zeros(max(1, 2 * ne))
    r = 0
    for k in range(T - 1):
        for i in range(nx):
            for j in range(ny):
                # W_k - W_k+1 - e <= 0 and W_k+1 - W_k - e <= 0
                A_ub[r, W(k, i, j)] = 1
                A_ub[r, W(k + 1, i, j)] = -1
                A_ub[r, E(k, i, j)] = -1
                A_ub[r + 1, W(k, i, j)] = -1
                A_ub[r + 1, W(k + 1, i, j)] = 1
                A_ub[r + 1, E(k, i, j)] = -1
                r += 2
    res = linprog(c, A_ub=A_ub.tocsr() if ne else None, b_ub=b_ub if ne else None,
                  A_eq=A_eq.tocsr() if nx + ny else None, b_eq=b_eq if nx + ny else None,
                  bounds=(0, None), method="highs")
    assert res.status == 0, res.message
    return float(res.fun)


def assignments(nx, ny):
    """Every assignment: a tuple giving each reference an estimate index or -1."""
    out = []
    for combo in itertools.product(range(-1, ny), repeat=nx):
        used = [j for j in combo if j >= 0]
        if len(used) == len(set(used)):
            out.append(combo)
    return out


def switch(a, b):
    s = 0.0
    for ja, jb in zip(a, b):
        if ja == jb:
            continue
        s += 1.0 if (ja >= 0 and jb >= 0) else 0.5
    return s


def integral_value(X, Y, T, p, m, f, g):
    nx, ny = len(X), len(Y)
    A = assignments(nx, ny)
    if len(A) ** 2 * T > 2_000_000:
        return None

    def step_cost(k, a):
        cost = 0.0
        taken = set()
        for i, j in enumerate(a):
            if j >= 0:
                cost += pair_cost(X[i][k], Y[j][k], p, m, f)
                taken.add(j)
            elif X[i][k] is not None:
                cost += m
        for j in range(ny):
            if j not in taken and Y[j][k] is not None:
                cost += f
        return cost

    best = [step_cost(0, a) for a in A]
    for k in range(1, T):
        sc = [step_cost(k, a) for a in A]
        best = [sc[b] + min(best[a] + g * switch(A[a], A[b]) for a in range(len(A)))
                for b in range(len(A))]
    return float(min(best))


def main():
    cases = []
    for n in range(240):
        T = int(rng.integers(1, 9))
        nx = int(rng.integers(0, 7))
        X = [trajectory(T) for _ in range(nx)]
        ny = int(rng.integers(0, 7))
        Y = [estimate_of(X[i] if i < nx else None, T) for i in range(ny)]
        cut = float(rng.choice([1.0, 2.0, 3.0]))
        p = float(rng.choice([1.0, 2.0]))
        gamma = float(rng.choice([0.0, 0.5, 1.0, 2.0, 4.0]))
        m = f = cut ** p / 2
        if n % 4 == 3:
            m, f = cut ** p * 0.8, cut ** p * 0.2
        g = gamma ** p
        case = {"steps": T, "order": p, "missed": m, "false": f, "switch": g,
                "xs": X, "ys": Y, "lp": lp_value(X, Y, T, p, m, f, g)}
        small = nx <= 3 and ny <= 3
        case["integral"] = integral_value(X, Y, T, p, m, f, g) if small else None
        cases.append(case)
    with open(OUT, "w") as fh:
        json.dump({"source": "scipy.optimize.linprog (HiGHS) and exhaustive enumeration",
                   "cases": cases}, fh, separators=(",", ":"))
        fh.write("\n")
    print(f"{len(cases)} cases, {sum(c['integral'] is not None for c in cases)} enumerated -> {OUT}")


if __name__ == "__main__":
    main()
