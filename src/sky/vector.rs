//! Unit vectors on the celestial sphere and the chord arithmetic built on them.
//!
//! A position (α, δ) becomes the unit vector u = (cos δ cos α, cos δ sin α, sin δ) in the
//! equatorial frame of the input coordinates. Two positions θ apart lie a chord
//! c = |u₁ − u₂| = 2 sin(θ/2) apart, so a radius test c² ≤ 4 sin²(r/2) needs no
//! trigonometry per pair (standard spherical geometry).
//!
//! ```
//! use fluxloom::sky::vector::{angle_for_chord_rad, chord2, radec_deg_to_vec};
//!
//! let a = radec_deg_to_vec(10.0, 20.0);
//! let b = radec_deg_to_vec(10.0, 21.0);
//! let theta_rad = angle_for_chord_rad(chord2(a, b).sqrt());
//! assert!((theta_rad.to_degrees() - 1.0).abs() < 1e-12);
//! ```

/// A Cartesian 3-vector, dimensionless; unit length when it stands for a sky position.
pub type Vec3 = [f64; 3];

/// Arcseconds per radian: 180 · 3600 / π = 648 000 / π = 206 264.806 247 096 36″.
///
/// ```
/// assert_eq!(fluxloom::sky::vector::ARCSEC_PER_RAD, 648_000.0 / std::f64::consts::PI);
/// ```
pub const ARCSEC_PER_RAD: f64 = 648_000.0 / std::f64::consts::PI;

/// Radians per arcsecond: π / 648 000 = 4.848 136 811 095 36 × 10⁻⁶ rad.
///
/// ```
/// let x = fluxloom::sky::vector::RAD_PER_ARCSEC * fluxloom::sky::vector::ARCSEC_PER_RAD;
/// assert!((x - 1.0).abs() < 1e-15);
/// ```
pub const RAD_PER_ARCSEC: f64 = std::f64::consts::PI / 648_000.0;

/// Arcseconds per degree: 3600 (exact, by definition of the arcsecond).
pub const ARCSEC_PER_DEG: f64 = 3600.0;

/// Milliarcseconds per arcsecond: 1000 (exact); proper motions come in mas/yr.
pub const MAS_PER_ARCSEC: f64 = 1000.0;

/// Unit vector of a position: (cos δ cos α, cos δ sin α, sin δ).
///
/// # Arguments
/// - `ra_deg`: right ascension α in degrees, any finite value (taken modulo 360°).
/// - `dec_deg`: declination δ in degrees, in [−90°, 90°].
pub fn radec_deg_to_vec(ra_deg: f64, dec_deg: f64) -> Vec3 {
    let (sin_ra, cos_ra) = ra_deg.to_radians().sin_cos();
    let (sin_dec, cos_dec) = dec_deg.to_radians().sin_cos();
    [cos_dec * cos_ra, cos_dec * sin_ra, sin_dec]
}

/// Position of a vector's direction: α = atan2(y, x) in [0°, 360°), δ = atan2(z, √(x² + y²))
/// in [−90°, 90°], both in degrees.
///
/// `v` need not have unit length (the atan2 forms are scale-free, which normalizes it and keeps
/// full precision near the poles, where asin(z) would not). The zero vector gives (0°, 0°).
pub fn vec_to_radec_deg(v: Vec3) -> (f64, f64) {
    let [x, y, z] = v;
    let ra_deg = wrap_360_deg(y.atan2(x).to_degrees());
    let dec_deg = z.atan2(x.hypot(y)).to_degrees();
    (ra_deg, dec_deg)
}

/// Squared chord length |a − b|², dimensionless (for unit vectors, 4 sin²(θ/2) with θ
/// the angle between them).
pub fn chord2(a: Vec3, b: Vec3) -> f64 {
    let dx = a[0] - b[0];
    let dy = a[1] - b[1];
    let dz = a[2] - b[2];
    dx * dx + dy * dy + dz * dz
}

/// Chord length between two unit vectors `theta_rad` radians apart: c = 2 sin(θ/2).
pub fn chord_for_angle_rad(theta_rad: f64) -> f64 {
    2.0 * (0.5 * theta_rad).sin()
}

/// Angle in radians subtended by a chord of the unit sphere: θ = 2 asin(c/2).
///
/// Accurate for small angles; near 180° it loses precision (about 69 µas at 179.9999°), where
/// [`crate::sky::separation::separation_vec_rad`] should be used instead. `chord` is clamped
/// to [0, 2].
pub fn angle_for_chord_rad(chord: f64) -> f64 {
    2.0 * (0.5 * chord.clamp(0.0, 2.0)).asin()
}

/// Dot product a·b, dimensionless.
pub fn dot(a: Vec3, b: Vec3) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

/// Cross product a × b, dimensionless.
pub fn cross(a: Vec3, b: Vec3) -> Vec3 {
    [
        a[1] * b[2] - a[2] * b[1],
        a[2] * b[0] - a[0] * b[2],
        a[0] * b[1] - a[1] * b[0],
    ]
}

/// Euclidean length |v|, dimensionless.
pub fn norm(v: Vec3) -> f64 {
    dot(v, v).sqrt()
}

/// Angle wrapped into [0°, 360°), in degrees (a result that rounds up to 360 becomes 0).
pub fn wrap_360_deg(angle_deg: f64) -> f64 {
    let w = angle_deg.rem_euclid(360.0);
    if w >= 360.0 { 0.0 } else { w }
}

/// Angle wrapped into (−180°, 180°], in degrees; used for right-ascension differences.
pub fn wrap_180_deg(angle_deg: f64) -> f64 {
    let w = wrap_360_deg(angle_deg);
    if w > 180.0 { w - 360.0 } else { w }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cardinal_points_have_the_expected_vectors() {
        // Check values: the definition u = (cos d cos a, cos d sin a, sin d) at exact angles.
        let close = |a: Vec3, b: Vec3| chord2(a, b) < 1e-30;
        assert!(close(radec_deg_to_vec(0.0, 0.0), [1.0, 0.0, 0.0]));
        assert!(close(radec_deg_to_vec(90.0, 0.0), [0.0, 1.0, 0.0]));
        assert!(close(radec_deg_to_vec(123.0, 90.0), [0.0, 0.0, 1.0]));
        assert!(close(radec_deg_to_vec(180.0, -90.0), [0.0, 0.0, -1.0]));
    }

    #[test]
    fn round_trip_keeps_positions_including_poles_and_seam() {
        for &(ra, dec) in &[
            (0.0, 0.0),
            (359.999_999_9, -30.0),
            (12.345, 89.999_999),
            (250.0, -89.999_999_99),
            (180.0, 45.0),
        ] {
            let (ra2, dec2) = vec_to_radec_deg(radec_deg_to_vec(ra, dec));
            // 1e-9 deg = 3.6 µas; the poles need the RA tolerance scaled by 1/cos(dec).
            assert!((dec2 - dec).abs() < 1e-12, "{ra} {dec} -> {ra2} {dec2}");
            let dra = wrap_180_deg(ra2 - ra).abs() * dec.to_radians().cos();
            assert!(dra < 1e-12, "{ra} {dec} -> {ra2} {dec2}");
        }
    }

    #[test]
    fn vec_to_radec_normalizes_and_wraps_ra() {
        let (ra, dec) = vec_to_radec_deg([0.0, -2.0, 0.0]);
        assert_eq!((ra, dec), (270.0, 0.0));
        let (ra, dec) = vec_to_radec_deg([3.0, 0.0, 3.0]);
        assert!(ra == 0.0 && (dec - 45.0).abs() < 1e-13);
        assert_eq!(vec_to_radec_deg([0.0, 0.0, 0.0]), (0.0, 0.0));
        let (ra, _) = vec_to_radec_deg([1.0, -1e-300, 0.0]);
        assert!((0.0..360.0).contains(&ra));
    }

    #[test]
    fn chord_and_angle_are_inverse() {
        // Check values: 2 sin(30°) = 1 and 2 sin(90°) = 2 (exact trigonometry).
        assert!((chord_for_angle_rad(60f64.to_radians()) - 1.0).abs() < 1e-15);
        assert!((chord_for_angle_rad(std::f64::consts::PI) - 2.0).abs() < 1e-15);
        for &theta in &[1e-12, 4.8e-9, 1e-3, 0.5, 2.0, 3.1] {
            let back = angle_for_chord_rad(chord_for_angle_rad(theta));
            assert!((back - theta).abs() <= 1e-15 * theta.max(1e-3), "{theta}");
        }
        assert_eq!(angle_for_chord_rad(2.000_000_1), std::f64::consts::PI);
    }

    #[test]
    fn chord2_of_90_degrees_is_2() {
        let a = radec_deg_to_vec(10.0, 0.0);
        let b = radec_deg_to_vec(100.0, 0.0);
        assert!((chord2(a, b) - 2.0).abs() < 1e-15);
        assert!(dot(a, b).abs() < 1e-15);
        assert!((norm(cross(a, b)) - 1.0).abs() < 1e-15);
    }

    #[test]
    fn wraps_cover_their_ranges() {
        assert_eq!(wrap_360_deg(-1e-20), 0.0);
        assert_eq!(wrap_360_deg(720.5), 0.5);
        assert_eq!(wrap_180_deg(359.5), -0.5);
        assert_eq!(wrap_180_deg(180.0), 180.0);
        assert_eq!(wrap_180_deg(-180.0), 180.0);
    }
}
