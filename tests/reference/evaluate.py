#!/usr/bin/env python3
"""An independent evaluator of the interchange contract (SPEC §4-§5), written from the
specification with numpy and scipy, used to cross-check plumbline's replay numbers and as
the speed baseline.

    python3 tests/reference/evaluate.py LOG.jsonl [--cutoff 2] [--order 1] [--out steps.json]

It implements: per-id linear interpolation of the reference between the messages just
before and just after each estimate stamp (exact match within 1 us), the wait for a
reference at or after the stamp measured on arrival times (recv, or the stamp), the
fallback to the last reference before within the tolerance, GOSPA (alpha = 2) with its
parts, OSPA, and the ego errors. Region and ego-frame sets are not implemented here.
"""
import argparse
import bisect
import json
import math
import sys
import time

import numpy as np
from scipy.optimize import linear_sum_assignment

EXACT = 1e-6


def wrap(a):
    r = math.fmod(a, 2 * math.pi)
    if r <= -math.pi:
        r += 2 * math.pi
    elif r > math.pi:
        r -= 2 * math.pi
    return r


class Buffer:
    """Messages of one reference role sorted by stamp."""

    def __init__(self):
        self.stamps = []
        self.msgs = []

    def add(self, stamp, msg):
        i = bisect.bisect_right(self.stamps, stamp)
        self.stamps.insert(i, stamp)
        self.msgs.insert(i, msg)

    def ready(self, t):
        return bool(self.stamps) and self.stamps[-1] >= t - EXACT

    def around(self, t):
        """('exact', m) | ('between', (t0, m0), (t1, m1)) | ('before', (t0, m0)) | (None,)"""
        i = bisect.bisect_left(self.stamps, t)
        cands = [k for k in (i - 1, i) if 0 <= k < len(self.stamps)
                 and abs(self.stamps[k] - t) <= EXACT]
        if cands:
            k = min(cands, key=lambda k: (abs(self.stamps[k] - t), -k))
            return ("exact", self.msgs[k])
        if 0 < i < len(self.stamps):
            return ("between", (self.stamps[i - 1], self.msgs[i - 1]), (self.stamps[i], self.msgs[i]))
        if i == len(self.stamps) and i > 0:
            return ("before", (self.stamps[i - 1], self.msgs[i - 1]))
        return (None,)


def gospa_ospa(X, Y, c, p):
    m, n = len(X), len(Y)
    half = c ** p / 2
    if m == 0 or n == 0:
        g = (half * (m + n)) ** (1 / p)
        return dict(gospa=g, gospa_localization=0.0, gospa_missed=half * m,
                    gospa_false=half * n, assigned_count=0, missed_count=m,
                    false_count=n, ospa=0.0 if m + n == 0 else c)
    D = np.sqrt(((X[:, None, :] - Y[None, :, :]) ** 2).sum(-1))
    C = np.minimum(D, c) ** p
    r, k = linear_sum_assignment(C)
    d = D[r, k]
    keep = d < c
    a = int(keep.sum())
    loc = float((d[keep] ** p).sum())
    g = (loc + half * (m - a) + half * (n - a)) ** (1 / p)
    big = max(m, n)
    o = ((float(C[r, k].sum()) + c ** p * (big - min(m, n))) / big) ** (1 / p)
    return dict(gospa=g, gospa_localization=loc, gospa_missed=half * (m - a),
                gospa_false=half * (n - a), assigned_count=a, missed_count=m - a,
                false_count=n - a, ospa=o)


def reference_points(buf, t, tol):
    kind = buf.around(t)
    if kind[0] == "exact":
        return [(o["x"], o["y"]) for o in kind[1]["objects"]]
    if kind[0] == "between":
        (t0, m0), (t1, m1) = kind[1], kind[2]
        w = (t - t0) / (t1 - t0)
        after = {o["id"]: o for o in m1["objects"]}
        pts = []
        for o in m0["objects"]:
            b = after.get(o["id"])
            if b is not None:
                pts.append((o["x"] + (b["x"] - o["x"]) * w, o["y"] + (b["y"] - o["y"]) * w))
        return pts
    if kind[0] == "before" and t - kind[1][0] <= tol + EXACT:
        return [(o["x"], o["y"]) for o in kind[1][1]["objects"]]
    return None


def reference_pose(buf, t, tol):
    kind = buf.around(t)
    if kind[0] == "exact":
        m = kind[1]
        return m["x"], m["y"], m["yaw"]
    if kind[0] == "between":
        (t0, a), (t1, b) = kind[1], kind[2]
        w = (t - t0) / (t1 - t0)
        return (a["x"] + (b["x"] - a["x"]) * w, a["y"] + (b["y"] - a["y"]) * w,
                wrap(a["yaw"] + w * wrap(b["yaw"] - a["yaw"])))
    if kind[0] == "before" and t - kind[1][0] <= tol + EXACT:
        m = kind[1][1]
        return m["x"], m["y"], m["yaw"]
    return None


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("log")
    ap.add_argument("--cutoff", type=float, default=2.0)
    ap.add_argument("--order", type=float, default=1.0)
    ap.add_argument("--max-wait", type=float, default=0.5)
    ap.add_argument("--tolerance", type=float, default=0.1)
    ap.add_argument("--prefix", default="rig/")
    ap.add_argument("--out")
    a = ap.parse_args()
    c, p = a.cutoff, a.order
    refs, ref_ego = Buffer(), Buffer()
    pend_t, pend_e = [], []
    steps, ego_steps = [], []
    states = 0
    now = -math.inf

    def eval_track(t, msg):
        X = reference_points(refs, t, a.tolerance)
        if X is None:
            return
        Y = [(o["x"], o["y"]) for o in msg["objects"]]
        r = gospa_ospa(np.array(X, dtype=float).reshape(-1, 2), np.array(Y, dtype=float).reshape(-1, 2), c, p)
        r["t"] = t
        steps.append(r)

    def eval_ego(t, msg):
        ref = reference_pose(ref_ego, t, a.tolerance)
        if ref is None:
            return
        ex, ey = msg["x"] - ref[0], msg["y"] - ref[1]
        s, co = math.sin(ref[2]), math.cos(ref[2])
        ego_steps.append(dict(t=t, ego_position_error_m=math.hypot(ex, ey),
                              ego_heading_error_rad=wrap(msg["yaw"] - ref[2]),
                              ego_longitudinal_error_m=ex * co + ey * s,
                              ego_lateral_error_m=-ex * s + ey * co))

    def drain(final):
        while pend_t and (final or pend_t[0][1] < now or refs.ready(pend_t[0][0])):
            t, _, m = pend_t.pop(0)
            eval_track(t, m)
        while pend_e and (final or pend_e[0][1] < now or ref_ego.ready(pend_e[0][0])):
            t, _, m = pend_e.pop(0)
            eval_ego(t, m)

    start = time.perf_counter()
    with open(a.log) as f:
        for line in f:
            if not line.strip():
                continue
            rec = json.loads(line)
            msg = rec["msg"]
            stamp = msg["stamp"]
            arrival = rec.get("recv")
            arrival = stamp if arrival is None else arrival
            now = max(now, arrival)
            drain(False)
            role = rec["key"][len(a.prefix):]
            if role == "reference/objects":
                refs.add(stamp, msg)
                states += len(msg.get("objects", []))
            elif role == "estimate/objects":
                pend_t.append((stamp, arrival + a.max_wait, msg))
                states += len(msg.get("objects", []))
            elif role == "reference/ego":
                ref_ego.add(stamp, msg)
            elif role == "estimate/ego":
                pend_e.append((stamp, arrival + a.max_wait, msg))
            drain(False)
    drain(True)
    elapsed = time.perf_counter() - start
    print(f"{states} object states in {elapsed:.3f} s: {states / elapsed:.0f} per second; "
          f"{len(steps)} tracking steps, {len(ego_steps)} ego steps", file=sys.stderr)
    if a.out:
        with open(a.out, "w") as f:
            json.dump({"tracking": steps, "ego": ego_steps}, f)
            f.write("\n")


if __name__ == "__main__":
    main()
