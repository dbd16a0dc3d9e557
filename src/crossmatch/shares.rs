//! Shares of a coarse source's flux among the finer sources under it, and
//! whether the companions of the brightest are faint enough to leave it the
//! coarse source (FIELD notes §5.14, common practice).
//!
//! The shares are estimated from one finer catalog's fluxes in its band
//! nearest in wavelength to the coarse band (nearest in ln λ, i.e. by the
//! ratio of wavelengths): share_k = F_k / Σ F. This assumes the finer sources
//! have the same colour between the two bands, which a red companion (a
//! young star beside a field star, say) breaks; the estimate is then too low
//! for it.
//!
//! - A contributor with an upper limit in that band enters with its limit:
//!   share_k ≤ L_k / Σ F grows with L_k, so the companions' share comes out as
//!   an upper bound.
//! - A contributor with no usable flux there (missing, not detected, rejected,
//!   saturated, or a magnitude-only band), or a limit as bright as the
//!   brightest detection, makes the shares unknown: the coarse source is then
//!   a blend, as when no flux is known at all.
//! - The companions' share is the sum over every contributor but the
//!   dominant (brightest) one, 1 − F_D / Σ F: what contaminates the dominant
//!   one's flux. It is compared with the threshold as a whole, so several
//!   faint companions together cannot contaminate by more than the threshold.

use super::config::BandSettings;
use super::input::BandValue;

/// The outcome of [`estimate`]: which contributor dominates, and the share
/// of the flux its companions carry.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ShareEstimate {
    /// Index of the dominant contributor (the brightest detection; ties go to
    /// the first).
    pub dominant: usize,
    /// Σ of the other contributors' shares, 1 − F_D / Σ F (an upper bound when
    /// a contributor entered with an upper limit).
    pub companion_share: f64,
}

/// The shares of `values`, one per contributor, all in one band; `None` when
/// they cannot be told (see the module documentation).
pub fn estimate(values: &[BandValue]) -> Option<ShareEstimate> {
    let mut dominant: Option<(usize, f64)> = None;
    let mut total = 0.0;
    for (k, v) in values.iter().enumerate() {
        match *v {
            BandValue::Detected(f) => {
                total += f;
                if dominant.is_none_or(|(_, best)| f > best) {
                    dominant = Some((k, f));
                }
            }
            BandValue::Limit(l) => total += l,
            BandValue::Measured | BandValue::None => return None,
        }
    }
    let (k, flux) = dominant?;
    let limit_as_bright = values
        .iter()
        .any(|v| matches!(*v, BandValue::Limit(l) if l >= flux));
    if limit_as_bright {
        return None;
    }
    Some(ShareEstimate {
        dominant: k,
        companion_share: 1.0 - flux / total,
    })
}

/// The band of `bands` with flux densities nearest to `wavelength_um` in
/// ln λ (ties go to the first), and that distance |ln(λ_b / λ)|.
pub fn nearest_band(bands: &[BandSettings], wavelength_um: f64) -> Option<(usize, f64)> {
    let mut best: Option<(usize, f64)> = None;
    for (b, band) in bands.iter().enumerate() {
        if !band.has_flux {
            continue;
        }
        let d = (band.wavelength_um / wavelength_um).ln().abs();
        if best.is_none_or(|(_, bd)| d < bd) {
            best = Some((b, d));
        }
    }
    best
}

/// True when companions carrying `companion_share` of the flux leave the
/// coarse source to the dominant contributor under `limit`
/// ([`super::config::MatchConfig::companion_share_limit`]).
pub fn is_faint(companion_share: f64, limit: f64) -> bool {
    companion_share < limit
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_star_with_a_companion_2600_times_fainter_dominates() {
        // 3.4 mJy and 3.4 mJy / 2600: share = 1 / 2601 = 3.845e-4 (arithmetic).
        let values = [
            BandValue::Detected(3.4e-3),
            BandValue::Detected(3.4e-3 / 2600.0),
        ];
        let e = estimate(&values).unwrap();
        assert_eq!(e.dominant, 0);
        assert!((e.companion_share - 1.0 / 2601.0).abs() < 1e-15);
        assert!((e.companion_share - 3.845e-4).abs() < 1e-7);
        assert!(is_faint(e.companion_share, 0.1));
    }

    #[test]
    fn two_equal_stars_are_a_blend() {
        let values = [BandValue::Detected(2e-3), BandValue::Detected(2e-3)];
        let e = estimate(&values).unwrap();
        assert_eq!(e.dominant, 0);
        assert!((e.companion_share - 0.5).abs() < 1e-15);
        assert!(!is_faint(e.companion_share, 0.1));
    }

    #[test]
    fn the_threshold_is_strict_and_companions_add_up() {
        // Dominant 9, companions 0.5 + 0.5: share 1/10 exactly, not below 10 %.
        let values = [
            BandValue::Detected(0.5),
            BandValue::Detected(9.0),
            BandValue::Detected(0.5),
        ];
        let e = estimate(&values).unwrap();
        assert_eq!(e.dominant, 1);
        assert!((e.companion_share - 0.1).abs() < 1e-15);
        assert!(!is_faint(0.1, 0.1));
        assert!(is_faint(0.099, 0.1));
        // A zero threshold makes every coarse source over two finer ones a blend.
        assert!(!is_faint(0.0, 0.0));
    }

    #[test]
    fn limits_bound_the_share_and_unknowns_refuse_it() {
        let e = estimate(&[BandValue::Detected(1.0), BandValue::Limit(0.02)]).unwrap();
        assert!((e.companion_share - 0.02 / 1.02).abs() < 1e-15);
        assert_eq!(
            estimate(&[BandValue::Detected(1.0), BandValue::Limit(1.0)]),
            None
        );
        assert_eq!(estimate(&[BandValue::Detected(1.0), BandValue::None]), None);
        assert_eq!(
            estimate(&[BandValue::Detected(1.0), BandValue::Measured]),
            None
        );
        assert_eq!(
            estimate(&[BandValue::Limit(1.0), BandValue::Limit(2.0)]),
            None
        );
    }

    #[test]
    fn nearest_band_by_wavelength_ratio() {
        let band = |w: f64, has_flux: bool| BandSettings {
            id: format!("b{w}"),
            wavelength_um: w,
            has_flux,
            resolution_arcsec: None,
        };
        let bands = [band(3.6, true), band(8.0, true), band(16.0, false)];
        // 24 µm: ln(24/8) = 1.099 beats ln(24/3.6) = 1.897; the 16 µm band has
        // no flux densities.
        let (b, d) = nearest_band(&bands, 24.0).unwrap();
        assert_eq!(b, 1);
        assert!((d - 3.0f64.ln()).abs() < 1e-15);
        // 5.4 µm: ln(8/5.4) = 0.393 is nearer than ln(5.4/3.6) = 0.405.
        assert_eq!(nearest_band(&bands, 5.4).unwrap().0, 1);
        assert_eq!(nearest_band(&bands[2..], 5.4), None);
    }
}
