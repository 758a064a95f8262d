#!/usr/bin/env python3
"""Feeding plumbline from a stack that is not written in Rust: a Python tracker stand-in
that publishes estimate and reference topics as JSON over zenoh, using zenoh's own Python
binding (`pip install eclipse-zenoh`).

    python3 examples/python_publisher.py --connect tcp/127.0.0.1:7447 --seconds 5

It plays a small scene of the Aldermoor campus: two carts moving along the loop road, a
tracker that sees them with a 0.2 m offset, and the shuttle's reference and estimated pose.
Every message follows SPEC §2 (JSON form; zenoh encoding application/json).
"""
import argparse
import json
import math
import time

import zenoh


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--connect", action="append", default=[], help="zenoh endpoint, e.g. tcp/127.0.0.1:7447")
    ap.add_argument("--prefix", default="rig", help="key prefix of the roles")
    ap.add_argument("--seconds", type=float, default=5.0)
    ap.add_argument("--rate", type=float, default=10.0, help="messages per second per topic")
    a = ap.parse_args()

    conf = zenoh.Config()
    if a.connect:
        conf.insert_json5("connect/endpoints", json.dumps(a.connect))
        conf.insert_json5("scouting/multicast/enabled", "false")
    session = zenoh.open(conf)
    enc = zenoh.Encoding.APPLICATION_JSON

    def put(role, msg):
        session.put(f"{a.prefix}/{role}", json.dumps(msg), encoding=enc)

    t0 = time.time()
    n = 0
    while time.time() - t0 < a.seconds:
        t = time.time()
        k = t - t0
        carts = [(1, 5.0 + 2.0 * k, -15.0), (2, 40.0 - 1.5 * k, 15.0)]
        put("reference/objects", {"stamp": t, "objects": [
            {"id": i, "x": x, "y": y, "length": 2.4, "width": 1.2, "class": "cart"} for i, x, y in carts]})
        put("estimate/objects", {"stamp": t, "objects": [
            {"id": 100 + i, "x": x + 0.2, "y": y, "cov": [0.04, 0.0, 0.0, 0.04]} for i, x, y in carts]})
        ego = {"stamp": t, "x": 4.0 * k, "y": -15.0, "yaw": 0.0, "v": 4.0}
        put("reference/ego", ego)
        put("estimate/ego", dict(ego, x=ego["x"] + 0.1, y=ego["y"] - 0.05))
        n += 4
        time.sleep(1.0 / a.rate)
    session.close()
    print(f"published {n} messages")


if __name__ == "__main__":
    main()
