//! Ego pose errors (SPEC §5).
//!
//! With e = estimate - reference position and the reference heading psi:
//! `ego_position_error_m = |e|`, `ego_longitudinal_error_m = e . (cos psi, sin psi)`
//! (forward positive), `ego_lateral_error_m = e . (-sin psi, cos psi)` (left positive),
//! `ego_heading_error_rad = wrap(yaw_est - yaw_ref)` to (-pi, pi].
//! Units: metres and radians. Window rule: per `estimate/ego` step.

use std::f64::consts::PI;

/// Wraps an angle to (-pi, pi].
pub fn wrap_angle(a: f64) -> f64 {
    let mut r = a % (2.0 * PI);
    if r <= -PI {
        r += 2.0 * PI;
    } else if r > PI {
        r -= 2.0 * PI;
    }
    r
}

/// Interpolates an angle from `a` to `b` along the shorter arc, `w` in [0, 1].
pub fn lerp_angle(a: f64, b: f64, w: f64) -> f64 {
    wrap_angle(a + w * wrap_angle(b - a))
}

/// Ego errors at one step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EgoError {
    /// |e| (m)
    pub position: f64,
    /// wrapped heading error (rad)
    pub heading: f64,
    /// along the reference heading (m)
    pub longitudinal: f64,
    /// left of the reference heading (m)
    pub lateral: f64,
}

/// Errors of `est` (x, y, yaw) against `reference` (x, y, yaw).
pub fn ego_error(est: [f64; 3], reference: [f64; 3]) -> EgoError {
    let (ex, ey) = (est[0] - reference[0], est[1] - reference[1]);
    let (s, c) = reference[2].sin_cos();
    EgoError {
        position: ex.hypot(ey),
        heading: wrap_angle(est[2] - reference[2]),
        longitudinal: ex * c + ey * s,
        lateral: -ex * s + ey * c,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wraps_into_half_open_interval() {
        assert_eq!(wrap_angle(PI), PI);
        assert_eq!(wrap_angle(-PI), PI);
        assert!((wrap_angle(3.0 * PI) - PI).abs() < 1e-12);
        assert!((wrap_angle(0.1 - 2.0 * PI) - 0.1).abs() < 1e-12);
        assert!((lerp_angle(3.0, -3.0, 0.5) - PI).abs() < 1e-12);
    }

    #[test]
    fn longitudinal_and_lateral_in_reference_frame() {
        // Reference facing +y (psi = pi/2); estimate 1 m ahead (+y) and 0.5 m to the right (+x).
        let e = ego_error([0.5, 1.0, PI / 2.0 + 0.1], [0.0, 0.0, PI / 2.0]);
        assert!((e.longitudinal - 1.0).abs() < 1e-12);
        assert!((e.lateral + 0.5).abs() < 1e-12);
        assert!((e.position - 1.25f64.sqrt()).abs() < 1e-12);
        assert!((e.heading - 0.1).abs() < 1e-12);
        // Heading error across the +-pi seam.
        let e = ego_error([0.0, 0.0, -3.1], [0.0, 0.0, 3.1]);
        assert!((e.heading - (2.0 * PI - 6.2)).abs() < 1e-12);
    }
}
