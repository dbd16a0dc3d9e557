//! Epoch propagation of positions by proper motion, as linear motion on the unit sphere.
//!
//! With e = (−sin α, cos α, 0) and n = (−sin δ cos α, −sin δ sin α, cos δ) the local east and
//! north unit vectors at the starting position u₀, and μ_α* = μ_α cos δ, μ_δ the proper motion
//! in radians per year,
//!
//! ```text
//! u(t) = normalize( u₀ + Δt · (μ_α* e + μ_δ n) )
//! ```
//!
//! This is straight-line space motion with zero parallax and zero radial velocity: it has no
//! 1/cos δ singularity at the poles and no perspective acceleration. The rigorous form that also
//! propagates parallax and radial velocity is in ESA 1997, The Hipparcos and Tycho Catalogues,
//! Vol. 1 §1.5.5 (from memory). With zero radial velocity the rigorous straight-line motion
//! projects exactly onto this form, whatever the distance: it agrees with astropy 6.1.7
//! `SkyCoord.apply_space_motion` (distance 10 pc, radial velocity 0) to about 1e-8 mas in
//! `tests/fixtures/sky/propagation.csv`. Perspective acceleration from a radial velocity is
//! what it leaves out; rigorous-minus-linear differences computed with astropy's space-motion
//! propagation are 0.015 mas for μ_α* = 100, μ_δ = −50 mas/yr at δ = 60° over 16 yr, and 0.165″ for
//! a Barnard's-star-like case over the same 16 yr.
//!
//! ```
//! use fluxloom::sky::propagation::propagate_deg;
//! use fluxloom::sky::separation::separation_deg;
//!
//! // 100 mas/yr east, −50 mas/yr north, J2016.0 → J2000.0: √(100² + 50²) · 16 mas = 1.789″.
//! let (ra, dec) = propagate_deg(30.0, 60.0, 100.0, -50.0, -16.0);
//! let moved_arcsec = separation_deg(30.0, 60.0, ra, dec) * 3600.0;
//! assert!((moved_arcsec - 1.788_854).abs() < 1e-6);
//! ```

use super::vector::{MAS_PER_ARCSEC, RAD_PER_ARCSEC, radec_deg_to_vec, vec_to_radec_deg};

/// Position in degrees after `dt_yr` years of linear space motion on the unit sphere,
/// u(t) = normalize(u₀ + Δt (μ_α* e + μ_δ n)); zero parallax and radial velocity assumed.
///
/// # Arguments
/// - `ra_deg`, `dec_deg`: position at the starting epoch, degrees (δ in [−90°, 90°]).
/// - `pmra_cosdec_masyr`: μ_α* = μ_α cos δ in mas/yr (the Hipparcos/Gaia convention).
/// - `pmdec_masyr`: μ_δ in mas/yr.
/// - `dt_yr`: target epoch minus starting epoch, Julian years; negative goes back in time.
///
/// Returns (α in [0°, 360°), δ in [−90°, 90°]). At a pole, east and north are taken along the
/// meridian `ra_deg`, as for any other position.
pub fn propagate_deg(
    ra_deg: f64,
    dec_deg: f64,
    pmra_cosdec_masyr: f64,
    pmdec_masyr: f64,
    dt_yr: f64,
) -> (f64, f64) {
    let (sin_ra, cos_ra) = ra_deg.to_radians().sin_cos();
    let (sin_dec, cos_dec) = dec_deg.to_radians().sin_cos();
    let u0 = radec_deg_to_vec(ra_deg, dec_deg);
    let east = [-sin_ra, cos_ra, 0.0];
    let north = [-sin_dec * cos_ra, -sin_dec * sin_ra, cos_dec];
    let step_east_rad = pmra_cosdec_masyr / MAS_PER_ARCSEC * RAD_PER_ARCSEC * dt_yr;
    let step_north_rad = pmdec_masyr / MAS_PER_ARCSEC * RAD_PER_ARCSEC * dt_yr;
    let u = [
        u0[0] + step_east_rad * east[0] + step_north_rad * north[0],
        u0[1] + step_east_rad * east[1] + step_north_rad * north[1],
        u0[2] + step_east_rad * east[2] + step_north_rad * north[2],
    ];
    vec_to_radec_deg(u)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sky::separation::{position_angle_deg, separation_deg};

    #[test]
    fn zero_motion_or_zero_time_keeps_the_position() {
        let (ra, dec) = propagate_deg(123.4, -56.7, 0.0, 0.0, 100.0);
        assert!((ra - 123.4).abs() < 1e-12 && (dec + 56.7).abs() < 1e-12);
        let (ra, dec) = propagate_deg(123.4, -56.7, 500.0, 500.0, 0.0);
        assert!((ra - 123.4).abs() < 1e-12 && (dec + 56.7).abs() < 1e-12);
    }

    #[test]
    fn displacement_is_atan_of_the_tangent_step() {
        // Check value: the tangent step of length s = μΔt rad maps to an arc atan(s) (exact
        // for this construction); 1″/yr for 10⁴ yr is 10⁴″, where atan(s) differs from s by
        // s³/3 ≈ 7.9″, so the test can tell the two apart.
        let s_rad = 1e4 * RAD_PER_ARCSEC;
        let (ra, dec) = propagate_deg(40.0, 10.0, 0.0, 1000.0, 1e4);
        let moved_rad = separation_deg(40.0, 10.0, ra, dec).to_radians();
        assert!((moved_rad - s_rad.atan()).abs() < 1e-14);
        assert!((ra - 40.0).abs() < 1e-12);
    }

    #[test]
    fn direction_follows_the_proper_motion_angle() {
        // Check value: a motion with μ_α* = μ_δ points to PA 45° (definition of PA).
        let (ra, dec) = propagate_deg(200.0, -35.0, 300.0, 300.0, 5.0);
        assert!((position_angle_deg(200.0, -35.0, ra, dec) - 45.0).abs() < 1e-6);
    }

    #[test]
    fn crosses_the_pole_without_a_singularity() {
        // A star 0.5″ from the north pole moving 1″/yr north for one year ends 0.5″ beyond the
        // pole on the opposite meridian (arc atan(1″) ≈ 1″ minus 1.2e-11″).
        let dec0 = 90.0 - 0.5 / 3600.0;
        let (ra, dec) = propagate_deg(10.0, dec0, 0.0, 1000.0, 1.0);
        assert!((ra - 190.0).abs() < 1e-6, "{ra}");
        assert!(((90.0 - dec) * 3600.0 - 0.5).abs() < 1e-9, "{dec}");
    }
}
