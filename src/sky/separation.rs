//! Angular separations, position angles and tangent-plane offsets.
//!
//! Separations use the spherical case of Vincenty's formula (Vincenty 1975, Survey Review 23,
//! 88 (from memory)), accurate from microarcseconds to 180°:
//!
//! ```text
//! θ = atan2( √[(cos δ₂ sin Δα)² + (cos δ₁ sin δ₂ − sin δ₁ cos δ₂ cos Δα)²],
//!            sin δ₁ sin δ₂ + cos δ₁ cos δ₂ cos Δα )
//! ```
//!
//! The law of cosines is not used: in float64 it cannot resolve angles below about 3 mas.
//!
//! ```
//! use fluxloom::sky::separation::{position_angle_deg, separation_deg};
//!
//! // Across RA 0/360: 0.0002° of RA at δ = −30° is 0.72″ · cos 30°.
//! let sep_arcsec = separation_deg(359.9999, -30.0, 0.0001, -30.0) * 3600.0;
//! assert!((sep_arcsec - 0.72 * 30f64.to_radians().cos()).abs() < 1e-7);
//! // Due north is position angle 0°, due east 90°.
//! assert!(position_angle_deg(10.0, 20.0, 10.0, 21.0).abs() < 1e-12);
//! assert!((position_angle_deg(10.0, 20.0, 10.1, 20.0) - 90.0).abs() < 0.1);
//! ```

use super::vector::{ARCSEC_PER_RAD, Vec3, cross, dot, norm, wrap_180_deg, wrap_360_deg};

/// Angular separation in degrees between (α₁, δ₁) and (α₂, δ₂), all in degrees, by the
/// spherical Vincenty formula (Vincenty 1975, from memory); accurate at all angles.
///
/// Δα is wrapped into (−180°, 180°] before it is converted, so positions either side of
/// RA 0/360 keep full precision.
pub fn separation_deg(ra1_deg: f64, dec1_deg: f64, ra2_deg: f64, dec2_deg: f64) -> f64 {
    let (sin_dra, cos_dra) = wrap_180_deg(ra2_deg - ra1_deg).to_radians().sin_cos();
    let (sin_d1, cos_d1) = dec1_deg.to_radians().sin_cos();
    let (sin_d2, cos_d2) = dec2_deg.to_radians().sin_cos();
    let num1 = cos_d2 * sin_dra;
    let num2 = cos_d1 * sin_d2 - sin_d1 * cos_d2 * cos_dra;
    let den = sin_d1 * sin_d2 + cos_d1 * cos_d2 * cos_dra;
    num1.hypot(num2).atan2(den).to_degrees()
}

/// Angle in radians between two unit vectors: θ = atan2(|a × b|, a·b); accurate at all
/// angles (the inputs need not be normalized, only parallel to the positions).
pub fn separation_vec_rad(a: Vec3, b: Vec3) -> f64 {
    norm(cross(a, b)).atan2(dot(a, b))
}

/// Position angle in degrees of point 2 seen from point 1, east of north, in [0°, 360°):
/// PA = atan2(cos δ₂ sin Δα, cos δ₁ sin δ₂ − sin δ₁ cos δ₂ cos Δα) (standard spherical
/// trigonometry; no tan δ singularity). All arguments in degrees.
///
/// Coincident points give 0°. Seen from a pole, "north" is the direction of RA `ra1_deg`
/// (the meridian the first point is given on).
pub fn position_angle_deg(ra1_deg: f64, dec1_deg: f64, ra2_deg: f64, dec2_deg: f64) -> f64 {
    let (sin_dra, cos_dra) = wrap_180_deg(ra2_deg - ra1_deg).to_radians().sin_cos();
    let (sin_d1, cos_d1) = dec1_deg.to_radians().sin_cos();
    let (sin_d2, cos_d2) = dec2_deg.to_radians().sin_cos();
    let east = cos_d2 * sin_dra;
    let north = cos_d1 * sin_d2 - sin_d1 * cos_d2 * cos_dra;
    wrap_360_deg(east.atan2(north).to_degrees())
}

/// Gnomonic (tangent-plane, TAN) offsets in arcsec of (`ra_deg`, `dec_deg`) about the tangent
/// point (`ra0_deg`, `dec0_deg`): (ξ east, η north), all inputs in degrees.
///
/// ```text
/// cos c = sin δ₀ sin δ + cos δ₀ cos δ cos Δα
/// ξ = cos δ sin Δα / cos c,   η = (cos δ₀ sin δ − sin δ₀ cos δ cos Δα) / cos c
/// ```
///
/// (the TAN projection, Calabretta & Greisen 2002, A&A 395, 1077 (from memory)). For points
/// 90° or more from the tangent point the projection does not exist and both offsets are NaN.
pub fn tangent_offsets_arcsec(
    ra0_deg: f64,
    dec0_deg: f64,
    ra_deg: f64,
    dec_deg: f64,
) -> (f64, f64) {
    let (sin_dra, cos_dra) = wrap_180_deg(ra_deg - ra0_deg).to_radians().sin_cos();
    let (sin_d0, cos_d0) = dec0_deg.to_radians().sin_cos();
    let (sin_d, cos_d) = dec_deg.to_radians().sin_cos();
    let cos_c = sin_d0 * sin_d + cos_d0 * cos_d * cos_dra;
    if cos_c.is_nan() || cos_c <= 0.0 {
        return (f64::NAN, f64::NAN);
    }
    let xi_rad = cos_d * sin_dra / cos_c;
    let eta_rad = (cos_d0 * sin_d - sin_d0 * cos_d * cos_dra) / cos_c;
    (xi_rad * ARCSEC_PER_RAD, eta_rad * ARCSEC_PER_RAD)
}

/// The gnomonic offsets of [`tangent_offsets_arcsec`] from unit vectors, without
/// trigonometry: with the local east and north unit vectors at `a`,
/// E = (−sin α, cos α, 0) and N = (−sin δ cos α, −sin δ sin α, cos δ) (read off `a`'s
/// components), ξ = (b·E)/(b·a) and η = (b·N)/(b·a), in arcsec.
///
/// `None` when `a` is within 1e-12 rad of a pole (east is undefined there) or `b` is
/// 90° or more from `a`.
pub fn tangent_offsets_vec_arcsec(a: Vec3, b: Vec3) -> Option<(f64, f64)> {
    let cos_dec = a[0].hypot(a[1]);
    let along = dot(a, b);
    if cos_dec < 1e-12 || along.is_nan() || along <= 0.0 {
        return None;
    }
    let (cos_ra, sin_ra, sin_dec) = (a[0] / cos_dec, a[1] / cos_dec, a[2]);
    let east = -sin_ra * b[0] + cos_ra * b[1];
    let north = -sin_dec * cos_ra * b[0] - sin_dec * sin_ra * b[1] + cos_dec * b[2];
    Some((
        east / along * ARCSEC_PER_RAD,
        north / along * ARCSEC_PER_RAD,
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sky::vector::radec_deg_to_vec;

    #[test]
    fn vector_and_angle_forms_of_the_gnomonic_offsets_agree() {
        // Both forms project onto the same tangent plane (Calabretta & Greisen 2002,
        // from memory); they differ only by rounding.
        let cases = [
            (150.0, 2.2, 150.0005, 2.2003),
            (359.9999, -30.0, 0.0001, -30.0),
            (10.0, 89.9, 190.0, 89.9005),
            (200.0, -60.0, 200.01, -59.99),
            (45.0, 0.0, 45.0, 0.0),
        ];
        for (ra0, dec0, ra, dec) in cases {
            let (xe, xn) = tangent_offsets_arcsec(ra0, dec0, ra, dec);
            let (ve, vn) =
                tangent_offsets_vec_arcsec(radec_deg_to_vec(ra0, dec0), radec_deg_to_vec(ra, dec))
                    .unwrap();
            assert!(
                (xe - ve).abs() < 1e-8 && (xn - vn).abs() < 1e-8,
                "{ra0} {dec0}: {xe} {xn} vs {ve} {vn}"
            );
        }
        assert!(tangent_offsets_vec_arcsec([0.0, 0.0, 1.0], radec_deg_to_vec(0.0, 89.0)).is_none());
        assert!(tangent_offsets_vec_arcsec([1.0, 0.0, 0.0], [-1.0, 0.0, 0.0]).is_none());
    }

    #[test]
    fn exact_angles_on_great_circles() {
        // Check values: exact spherical geometry (90° along the equator, pole to equator,
        // antipodes, and a meridian arc equal to the declination difference).
        assert!((separation_deg(0.0, 0.0, 90.0, 0.0) - 90.0).abs() < 1e-13);
        assert!((separation_deg(17.0, 90.0, 200.0, 0.0) - 90.0).abs() < 1e-13);
        assert!((separation_deg(10.0, 20.0, 190.0, -20.0) - 180.0).abs() < 1e-13);
        assert!((separation_deg(33.0, -10.0, 33.0, 12.5) - 22.5).abs() < 1e-13);
        assert_eq!(separation_deg(1.0, 2.0, 1.0, 2.0), 0.0);
    }

    #[test]
    fn resolves_one_milliarcsecond() {
        // Check value: a meridian step of 1 mas (δ differs by 1/3.6e6 deg) is 1 mas by
        // definition; the law of cosines would return 0 here.
        let sep_mas = separation_deg(45.0, 45.0, 45.0, 45.0 + 1.0 / 3.6e6) * 3.6e6;
        assert!((sep_mas - 1.0).abs() < 1e-7, "{sep_mas}");
    }

    #[test]
    fn vector_form_agrees_with_vincenty() {
        for &(a1, d1, a2, d2) in &[
            (10.0, -20.0, 200.0, 35.0),
            (359.9999, -30.0, 0.0001, -30.0),
            (0.0, 0.0, 180.0, 0.0001),
            (150.0, 2.2, 150.0005, 2.2003),
        ] {
            let v = separation_vec_rad(radec_deg_to_vec(a1, d1), radec_deg_to_vec(a2, d2));
            let s = separation_deg(a1, d1, a2, d2).to_radians();
            // 1e-15 rad = 0.2 nanoarcsec: both forms are accurate to rounding.
            assert!((v - s).abs() < 1e-15, "{a1} {d1} {a2} {d2}: {v} vs {s}");
        }
    }

    #[test]
    fn position_angles_of_cardinal_directions() {
        // Check values: north 0°, east 90°, south 180°, west 270° (definition of PA).
        assert!(position_angle_deg(50.0, 10.0, 50.0, 10.001).abs() < 1e-9);
        assert!((position_angle_deg(50.0, 0.0, 50.001, 0.0) - 90.0).abs() < 1e-9);
        assert!((position_angle_deg(50.0, 10.0, 50.0, 9.999) - 180.0).abs() < 1e-9);
        assert!((position_angle_deg(0.0005, 0.0, 359.9995, 0.0) - 270.0).abs() < 1e-9);
        assert_eq!(position_angle_deg(5.0, 5.0, 5.0, 5.0), 0.0);
    }

    #[test]
    fn tangent_offsets_are_small_angle_offsets_near_the_centre() {
        // Check values: for a 1″ offset the gnomonic ξ, η equal Δα cos δ and Δδ to
        // O(θ³) ≈ 1e-11″ (small-angle expansion of the TAN projection).
        let (xi, eta) = tangent_offsets_arcsec(359.9999, 60.0, 0.0001, 60.0 + 1.0 / 3600.0);
        assert!((xi - 0.72 * 0.5).abs() < 1e-5, "{xi}");
        assert!((eta - 1.0).abs() < 1e-5, "{eta}");
        assert_eq!(tangent_offsets_arcsec(1.0, 2.0, 1.0, 2.0), (0.0, 0.0));
        let (xi, eta) = tangent_offsets_arcsec(0.0, 0.0, 95.0, 0.0);
        assert!(xi.is_nan() && eta.is_nan());
    }

    #[test]
    fn tangent_offsets_at_45_degrees() {
        // Check value: a point 45° north of the tangent point projects to η = tan 45° rad.
        let (xi, eta) = tangent_offsets_arcsec(10.0, 0.0, 10.0, 45.0);
        assert!(xi.abs() < 1e-9);
        assert!((eta - ARCSEC_PER_RAD).abs() < 1e-6);
    }
}
