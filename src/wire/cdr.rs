//! CDR, the encoding ROS 2 messages travel and are recorded in, for the built-in pose types
//! (`geometry_msgs/msg/PoseStamped`, `geometry_msgs/msg/PoseWithCovarianceStamped`,
//! `nav_msgs/msg/Odometry`) read into the contract's [`Pose`].
//!
//! The layout is plain CDR (OMG DDS-XTypes 1.3, 7.4.3, the form called XCDR1 there), as ROS
//! 2's middleware writes it: a 4-byte encapsulation header (representation id `0x0000` for
//! big-endian, `0x0001` for little-endian, then two option bytes, ignored), then the fields
//! in declaration order, each primitive aligned to its own size counted from the end of that
//! header; a string is a `uint32` length that counts its terminating NUL, then the bytes; a
//! fixed array (`float64[36]`) is its elements with no length. The standard definitions
//! (`std_msgs/Header`: `builtin_interfaces/Time stamp` = `int32 sec`, `uint32 nanosec`, then
//! `string frame_id`; `Pose`: a `Point` and a `Quaternion`, 7 `float64`) give, for example,
//! a `PoseStamped` in frame `map` of 76 bytes with the pose at offset 16 after the header,
//! and an `Odometry` in frames `odom` and `base_link` of 724 bytes; `tests/ros2_cdr.rs`
//! checks both, and every field, against payloads serialized by `rosbags` (PyPI).
//!
//! Nothing is guessed: a payload that ends early, claims a string longer than what is left,
//! carries an unknown representation or a stamp whose nanoseconds reach a second is refused
//! with a reason ([`CdrError::reason`]). Bytes after the message are ignored, as DDS pads a
//! sample to a multiple of 4.

use crate::msg::Pose;

/// The pose types read without a mapping.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PoseType {
    /// `geometry_msgs/msg/PoseStamped`.
    PoseStamped,
    /// `geometry_msgs/msg/PoseWithCovarianceStamped` (covariance carried).
    PoseWithCovarianceStamped,
    /// `nav_msgs/msg/Odometry` (covariance carried; speed from the twist).
    Odometry,
}

impl PoseType {
    /// The type for a ROS 2 type name (`package/msg/Name`), if built in.
    pub fn from_name(name: &str) -> Option<PoseType> {
        match name {
            "geometry_msgs/msg/PoseStamped" => Some(PoseType::PoseStamped),
            "geometry_msgs/msg/PoseWithCovarianceStamped" => Some(PoseType::PoseWithCovarianceStamped),
            "nav_msgs/msg/Odometry" => Some(PoseType::Odometry),
            _ => None,
        }
    }
}

/// Why a payload was refused.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum CdrError {
    /// The payload ends before the field at this offset (after the header) does.
    #[error("payload ends at {len} bytes, a field needs {need} more at offset {at}")]
    Truncated {
        /// Offset of the field after the encapsulation header.
        at: usize,
        /// Bytes it needs.
        need: usize,
        /// Bytes after the header.
        len: usize,
    },
    /// The encapsulation header names a representation other than plain CDR.
    #[error("representation id {0:#06x} is not plain CDR (0x0000 or 0x0001)")]
    Representation(u16),
    /// A string without its terminating NUL, or of length 0 (CDR counts the NUL).
    #[error("string at offset {0} is not NUL-terminated")]
    String(usize),
    /// A stamp whose nanoseconds are a second or more.
    #[error("stamp nanoseconds {0} are not below 1e9")]
    Nanoseconds(u32),
}

impl CdrError {
    /// The reason code the input counters use.
    pub fn reason(&self) -> &'static str {
        match self {
            CdrError::Truncated { .. } => "cdr_truncated",
            CdrError::Representation(_) => "cdr_representation",
            CdrError::String(_) => "cdr_string",
            CdrError::Nanoseconds(_) => "cdr_stamp",
        }
    }
}

/// A reader over one payload, after its encapsulation header.
#[derive(Debug)]
pub struct Cdr<'a> {
    data: &'a [u8],
    at: usize,
    little: bool,
}

impl<'a> Cdr<'a> {
    /// Reads the encapsulation header.
    pub fn new(payload: &'a [u8]) -> Result<Cdr<'a>, CdrError> {
        let head = payload.get(..4).ok_or(CdrError::Truncated { at: 0, need: 4, len: payload.len() })?;
        let little = match u16::from_be_bytes([head[0], head[1]]) {
            0x0000 => false,
            0x0001 => true,
            id => return Err(CdrError::Representation(id)),
        };
        Ok(Cdr { data: &payload[4..], at: 0, little })
    }

    /// Offset after the header of the next byte to read.
    pub fn offset(&self) -> usize {
        self.at
    }

    fn take<const N: usize>(&mut self) -> Result<[u8; N], CdrError> {
        // Aligned to its own size (N is 1, 2, 4 or 8), from the end of the header.
        let at = self.at.next_multiple_of(N);
        let bytes =
            self.data.get(at..at + N).ok_or(CdrError::Truncated { at, need: N, len: self.data.len() })?;
        self.at = at + N;
        Ok(bytes.try_into().expect("N bytes"))
    }

    /// A `uint32`.
    pub fn u32(&mut self) -> Result<u32, CdrError> {
        let b = self.take::<4>()?;
        Ok(if self.little { u32::from_le_bytes(b) } else { u32::from_be_bytes(b) })
    }

    /// An `int32`.
    pub fn i32(&mut self) -> Result<i32, CdrError> {
        Ok(self.u32()? as i32)
    }

    /// A `float64`.
    pub fn f64(&mut self) -> Result<f64, CdrError> {
        let b = self.take::<8>()?;
        Ok(if self.little { f64::from_le_bytes(b) } else { f64::from_be_bytes(b) })
    }

    /// A string's bytes, without the NUL (not checked as UTF-8: frames are only skipped).
    pub fn string(&mut self) -> Result<&'a [u8], CdrError> {
        let n = self.u32()? as usize;
        let at = self.at;
        let bytes = self.data.get(at..at.saturating_add(n)).ok_or(CdrError::Truncated {
            at,
            need: n,
            len: self.data.len(),
        })?;
        match bytes.split_last() {
            Some((0, s)) => {
                self.at = at + n;
                Ok(s)
            }
            _ => Err(CdrError::String(at)),
        }
    }

    /// `builtin_interfaces/Time` as seconds, then the header's frame (skipped).
    fn header(&mut self) -> Result<f64, CdrError> {
        let sec = self.i32()?;
        let nanosec = self.u32()?;
        if nanosec >= 1_000_000_000 {
            return Err(CdrError::Nanoseconds(nanosec));
        }
        self.string()?;
        Ok(sec as f64 + nanosec as f64 * 1e-9)
    }

    /// `geometry_msgs/Pose`: x, y and the yaw of the orientation.
    fn pose(&mut self) -> Result<(f64, f64, f64), CdrError> {
        let (x, y, _z) = (self.f64()?, self.f64()?, self.f64()?);
        let (qx, qy, qz, qw) = (self.f64()?, self.f64()?, self.f64()?, self.f64()?);
        Ok((x, y, yaw_of(qx, qy, qz, qw)))
    }

    /// `float64[36]`, row-major over x, y, z, rot x, rot y, rot z: the 3x3 of x, y and rot z.
    fn covariance(&mut self) -> Result<[f64; 9], CdrError> {
        let mut c = [0.0; 36];
        for v in &mut c {
            *v = self.f64()?;
        }
        const AXES: [usize; 3] = [0, 1, 5];
        Ok(std::array::from_fn(|k| c[6 * AXES[k / 3] + AXES[k % 3]]))
    }
}

/// The yaw (rotation about z, of the z-y-x Euler angles) of a quaternion:
/// `atan2(2 (w z + x y), 1 - 2 (y^2 + z^2))`.
pub fn yaw_of(x: f64, y: f64, z: f64, w: f64) -> f64 {
    (2.0 * (w * z + x * y)).atan2(1.0 - 2.0 * (y * y + z * z))
}

/// A built-in pose message as the contract's pose: the header stamp, x, y, the yaw, the
/// speed (`Odometry`: the planar norm of the twist's linear part) and the covariance of x,
/// y and yaw where the message has one. Values are not judged here: the caller validates
/// the pose as it does any other.
pub fn decode_pose(kind: PoseType, payload: &[u8]) -> Result<Pose, CdrError> {
    let mut r = Cdr::new(payload)?;
    let stamp = r.header()?;
    if kind == PoseType::Odometry {
        r.string()?; // child_frame_id
    }
    let (x, y, yaw) = r.pose()?;
    let cov = match kind {
        PoseType::PoseStamped => None,
        _ => Some(r.covariance()?),
    };
    let v = match kind {
        PoseType::Odometry => {
            let (vx, vy, _vz) = (r.f64()?, r.f64()?, r.f64()?);
            for _ in 0..3 {
                r.f64()?; // angular
            }
            r.covariance()?; // the twist's, read so a short payload is refused
            Some(vx.hypot(vy))
        }
        _ => None,
    };
    Ok(Pose { stamp, x, y, yaw, v, cov })
}
