"""CDR fixtures for the built-in ROS 2 pose types, serialized by `rosbags` (PyPI: a pure-Python
rosbag2 reader and writer with its own CDR serializer and the standard message definitions,
ROS 2 Humble's). Writes tests/fixtures/ros2_cdr.json: per case the type, the byte order, the
payload in hex and the pose we expect from it, computed here:
  stamp = sec + nanosec * 1e-9
  yaw   = atan2(2 (w z + x y), 1 - 2 (y^2 + z^2))   (the z-y-x Euler yaw of a unit quaternion)
  v     = hypot(twist.linear.x, twist.linear.y)       (Odometry only)
  cov   = rows and columns x, y, rot z (0, 1, 5) of the 6x6 pose covariance
Run: pip install rosbags==0.11.9 && python3 tests/reference/ros2_cdr.py
"""
import json
import math
import pathlib
import random

import numpy as np
from rosbags.typesys import Stores, get_typestore

ts = get_typestore(Stores.ROS2_HUMBLE)
T = ts.types
Time, Header = T["builtin_interfaces/msg/Time"], T["std_msgs/msg/Header"]
Point, Quat, Pose = T["geometry_msgs/msg/Point"], T["geometry_msgs/msg/Quaternion"], T["geometry_msgs/msg/Pose"]
PoseStamped = T["geometry_msgs/msg/PoseStamped"]
PoseCov, PoseCovStamped = T["geometry_msgs/msg/PoseWithCovariance"], T["geometry_msgs/msg/PoseWithCovarianceStamped"]
Vec3, Twist, TwistCov = T["geometry_msgs/msg/Vector3"], T["geometry_msgs/msg/Twist"], T["geometry_msgs/msg/TwistWithCovariance"]
Odometry = T["nav_msgs/msg/Odometry"]
rng = random.Random(19)
FRAMES = ["map", "odom", "", "campus_site_frame", "a"]


def quat(yaw, tilt):
    # A heading `yaw` with a small roll `tilt` about x (so the formula, not just 2 atan2(z, w), is exercised).
    cy, sy, cr, sr = math.cos(yaw / 2), math.sin(yaw / 2), math.cos(tilt / 2), math.sin(tilt / 2)
    return Quat(x=cy * sr, y=sy * sr, z=sy * cr, w=cy * cr)


def yaw_of(q):
    return math.atan2(2 * (q.w * q.z + q.x * q.y), 1 - 2 * (q.y * q.y + q.z * q.z))


def cov3(c):
    idx = [0, 1, 5]
    return [float(c[6 * r + k]) for r in idx for k in idx]


cases = []
for n in range(24):
    kind = ["geometry_msgs/msg/PoseStamped", "geometry_msgs/msg/PoseWithCovarianceStamped", "nav_msgs/msg/Odometry"][n % 3]
    little = n % 2 == 0
    sec, nsec = rng.randrange(0, 2_000_000_000), rng.randrange(0, 1_000_000_000)
    header = Header(stamp=Time(sec=sec, nanosec=nsec), frame_id=FRAMES[n % len(FRAMES)])
    q = quat(rng.uniform(-math.pi, math.pi), rng.uniform(-0.05, 0.05))
    pose = Pose(position=Point(x=rng.uniform(-500, 500), y=rng.uniform(-500, 500), z=rng.uniform(-2, 2)), orientation=q)
    c = np.array([rng.uniform(-1, 1) for _ in range(36)], dtype=np.float64)
    want = {"stamp": sec + nsec * 1e-9, "x": pose.position.x, "y": pose.position.y, "yaw": yaw_of(q), "v": None, "cov": None}
    if kind.endswith("PoseStamped") and "Covariance" not in kind:
        msg = PoseStamped(header=header, pose=pose)
    elif "Covariance" in kind:
        msg = PoseCovStamped(header=header, pose=PoseCov(pose=pose, covariance=c))
        want["cov"] = cov3(c)
    else:
        lin = Vec3(x=rng.uniform(-15, 15), y=rng.uniform(-2, 2), z=0.0)
        twist = TwistCov(twist=Twist(linear=lin, angular=Vec3(x=0.0, y=0.0, z=rng.uniform(-1, 1))), covariance=np.zeros(36))
        msg = Odometry(header=header, child_frame_id=FRAMES[(n + 1) % len(FRAMES)], pose=PoseCov(pose=pose, covariance=c), twist=twist)
        want["cov"] = cov3(c)
        want["v"] = math.hypot(lin.x, lin.y)
    data = bytes(ts.serialize_cdr(msg, kind, little_endian=little))
    cases.append({"type": kind, "little_endian": little, "frame": header.frame_id, "hex": data.hex(), "len": len(data), "want": want})

# The byte counts the standard layouts give (checked by the suite): a PoseStamped in frame
# "map", and an Odometry in frames "odom" and "base_link".
ps = PoseStamped(header=Header(stamp=Time(sec=0, nanosec=0), frame_id="map"), pose=Pose(position=Point(x=0.0, y=0.0, z=0.0), orientation=Quat(x=0.0, y=0.0, z=0.0, w=1.0)))
od = Odometry(header=Header(stamp=Time(sec=0, nanosec=0), frame_id="odom"), child_frame_id="base_link",
              pose=PoseCov(pose=ps.pose, covariance=np.zeros(36)),
              twist=TwistCov(twist=Twist(linear=Vec3(x=0.0, y=0.0, z=0.0), angular=Vec3(x=0.0, y=0.0, z=0.0)), covariance=np.zeros(36)))
sizes = {"pose_stamped_map": len(ts.serialize_cdr(ps, "geometry_msgs/msg/PoseStamped")),
         "odometry_odom_base_link": len(ts.serialize_cdr(od, "nav_msgs/msg/Odometry"))}
out = pathlib.Path(__file__).resolve().parents[1] / "fixtures" / "ros2_cdr.json"
out.write_text(json.dumps({"source": "rosbags (PyPI), ROS 2 Humble type store", "sizes": sizes, "cases": cases}, indent=1) + "\n")
print(out, len(cases), sizes)
