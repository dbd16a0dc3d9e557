//! Shares of a coarse source's flux among the finer sources under it, and
//! whether the companions of the brightest are faint enough to leave it the
//! coarse source (FIELD notes §5.14, common practice).
//!
//! The shares are estimated from one finer catalog's fluxes in its band
//! nearest in wavelength to the coarse band (nearest in ln λ, i.e. by the
//! ratio of wavelengths) in which every contributor has a usable value:
//! share_k = F_k / Σ F ([`shares_at`]). Taken as they are, those fluxes
//! assume the finer sources have one colour between that band and the coarse
//! one, which a red companion (a galaxy or a disk beside a field star, seen
//! at 24 µm from 8 µm) breaks: its share comes out too low. So when every
//! contributor is detected in a second band of that catalog as well, each
//! one's flux is carried to the coarse wavelength by the power law through
//! its two values, F(λ) = F₁ (λ/λ₁)^s with s = ln(F₁/F₂) / ln(λ₁/λ₂)
//! (log-log interpolation or extrapolation, common practice), s kept within
//! [`SLOPE_RANGE`], and carried no farther than [`MAX_COLOUR_REACH`] lever
//! arms (else the fluxes are taken as they are). What remains assumed is that each contributor's SED
//! goes on as it does between those two bands.
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

/// The range the power-law slope d ln F_ν / d ln λ of [`shares_at`] is kept
/// in: from −4, steeper than the Rayleigh–Jeans fall (−2) to leave room for
/// noise, to +10, steep enough for the Wien side of cool stars in the blue.
/// Beyond it a slope is taken to be noise, not colour (common practice for
/// the bounds' physics; the margins are our choice).
pub const SLOPE_RANGE: (f64, f64) = (-4.0, 10.0);

/// Two bands closer than this in ln λ (5 %) make no colour: their ratio is
/// mostly noise.
pub const MIN_COLOUR_LEVER: f64 = 0.05;

/// The farthest a power law is carried beyond its nearer band, in units of
/// its lever arm |ln(λ₁/λ₂)|. The error of a carried ln F grows with that
/// ratio, and a slope measured far from the coarse band may not hold there
/// (the Wien side of a photosphere, measured in the optical, turns over
/// before the infrared): from 0.78 and 0.62 µm to 3.6 µm is 6.9 lever arms,
/// from 8 and 5.8 µm to 24 µm 3.4 (our choice, set on the demo field).
pub const MAX_COLOUR_REACH: f64 = 4.0;

/// The shares at `wavelength_um` of contributors whose values in band `b` of
/// `bands` are `values_in(b)`, one per contributor (see the module
/// documentation): from the band with flux densities nearest in ln λ where
/// [`estimate`] can tell them, carried by each contributor's power law
/// through a second band when all are detected in both. `None` when no band
/// can tell them.
pub fn shares_at(
    bands: &[BandSettings],
    wavelength_um: f64,
    values_in: impl Fn(usize) -> Vec<BandValue>,
) -> Option<ShareEstimate> {
    let distance = |b: usize| (bands[b].wavelength_um / wavelength_um).ln().abs();
    let mut order: Vec<usize> = (0..bands.len()).filter(|&b| bands[b].has_flux).collect();
    // Stable: ties go to the first band.
    order.sort_by(|&a, &b| distance(a).total_cmp(&distance(b)));
    let (nearest, first, colour_free) = order.iter().find_map(|&b| {
        let values = values_in(b);
        estimate(&values).map(|e| (b, values, e))
    })?;
    let detected = |values: &[BandValue]| -> Option<Vec<f64>> {
        values
            .iter()
            .map(|v| match *v {
                BandValue::Detected(f) => Some(f),
                _ => None,
            })
            .collect()
    };
    let Some(f1) = detected(&first) else {
        return Some(colour_free);
    };
    let lambda1 = bands[nearest].wavelength_um;
    let second = order.iter().find_map(|&b| {
        let lever = (lambda1 / bands[b].wavelength_um).ln();
        if lever.abs() < MIN_COLOUR_LEVER {
            return None;
        }
        detected(&values_in(b)).map(|f2| (lever, f2))
    });
    let Some((lever, f2)) = second else {
        return Some(colour_free);
    };
    let reach = (wavelength_um / lambda1).ln();
    if reach.abs() > MAX_COLOUR_REACH * lever.abs() {
        return Some(colour_free);
    }
    let carried: Vec<BandValue> = f1
        .iter()
        .zip(&f2)
        .map(|(&a, &b)| {
            let slope = ((a / b).ln() / lever).clamp(SLOPE_RANGE.0, SLOPE_RANGE.1);
            BandValue::Detected(a * (slope * reach).exp())
        })
        .collect();
    estimate(&carried)
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

    fn flux_band(w: f64) -> BandSettings {
        BandSettings {
            id: format!("b{w}"),
            wavelength_um: w,
            has_flux: true,
            resolution_arcsec: None,
        }
    }

    #[test]
    fn a_red_companion_is_carried_to_the_coarse_band_by_its_colour() {
        // Bands at 4 and 8 µm, coarse band at 16 µm: lever ln 2, reach ln 2 (one lever arm).
        // Star 4 → 2 (slope −1): 1 at 16 µm. Companion 0.05 → 0.2 (slope +2): 0.8 at 16 µm.
        // Share 0.8 / 1.8 = 0.444444 (arithmetic), where 8 µm alone gives 0.2 / 2.2 = 0.0909.
        let bands = [flux_band(4.0), flux_band(8.0)];
        let star_and_red = |b: usize| match b {
            0 => vec![BandValue::Detected(4.0), BandValue::Detected(0.05)],
            _ => vec![BandValue::Detected(2.0), BandValue::Detected(0.2)],
        };
        let e = shares_at(&bands, 16.0, star_and_red).unwrap();
        assert_eq!(e.dominant, 0);
        assert!((e.companion_share - 0.8 / 1.8).abs() < 1e-12, "{e:?}");
        // Between the bands (interpolation): at √32 µm, half way in ln λ, the star is
        // 4/√2 = 2.828427 and the companion 0.05 · 2 = 0.1: share 0.1 / 2.928427 = 0.034148.
        let e = shares_at(&bands, 32f64.sqrt(), star_and_red).unwrap();
        assert!((e.companion_share - 0.1 / (0.1 + 2.0 * 2f64.sqrt())).abs() < 1e-12);
        // With the 8 µm band alone the share is colour-free.
        let e = shares_at(&bands[1..], 16.0, |_| star_and_red(1)).unwrap();
        assert!((e.companion_share - 0.2 / 2.2).abs() < 1e-12);
    }

    #[test]
    fn slopes_are_bounded_and_far_reaches_stay_colour_free() {
        // A companion rising 1 → 2^12 between 4 and 8 µm (slope 12) is carried at
        // slope 10 only: to 16 µm, 4096 · 2^10 = 4,194,304; the star (2 → 2, slope 0) stays 2.
        let bands = [flux_band(4.0), flux_band(8.0)];
        let steep = |b: usize| match b {
            0 => vec![BandValue::Detected(2.0), BandValue::Detected(1.0)],
            _ => vec![BandValue::Detected(2.0), BandValue::Detected(4096.0)],
        };
        let e = shares_at(&bands, 16.0, steep).unwrap();
        assert_eq!(e.dominant, 1);
        assert!((e.companion_share - 2.0 / (2.0 + 4096.0 * 1024.0)).abs() < 1e-15);
        // 100 µm is ln 12.5 = 3.64 lever arms past 8 µm: still carried. 256 µm (5 arms) is not.
        let gentle = |b: usize| match b {
            0 => vec![BandValue::Detected(4.0), BandValue::Detected(0.1)],
            _ => vec![BandValue::Detected(2.0), BandValue::Detected(0.1)],
        };
        let e = shares_at(&bands, 100.0, gentle).unwrap();
        // Star 2 · 8/100 = 0.16 against 0.1: the star dominates, share 0.1 / 0.26.
        assert!((e.companion_share - 0.1 / 0.26).abs() < 1e-12, "{e:?}");
        let e = shares_at(&bands, 256.0, gentle).unwrap();
        assert!((e.companion_share - 0.1 / 2.1).abs() < 1e-12, "{e:?}");
        // Two bands 2 % apart in λ make no colour.
        let close = [flux_band(7.84), flux_band(8.0)];
        let e = shares_at(&close, 16.0, |_| {
            vec![BandValue::Detected(2.0), BandValue::Detected(0.1)]
        })
        .unwrap();
        assert!((e.companion_share - 0.1 / 2.1).abs() < 1e-12);
    }

    #[test]
    fn an_unusable_nearest_band_gives_way_to_the_next() {
        // The star is saturated at 1 µm (no flux), so the 0.5 µm band tells the shares;
        // the 1 µm band cannot give a colour either, so they are taken as they are.
        let bands = [flux_band(0.5), flux_band(1.0)];
        let values = |b: usize| match b {
            0 => vec![BandValue::Detected(3.0), BandValue::Detected(0.03)],
            _ => vec![BandValue::Measured, BandValue::Detected(0.05)],
        };
        let e = shares_at(&bands, 1.2, values).unwrap();
        assert!((e.companion_share - 0.03 / 3.03).abs() < 1e-12);
        // A limit in the nearest band: colour-free, an upper bound.
        let with_limit = |b: usize| match b {
            0 => vec![BandValue::Detected(3.0), BandValue::Detected(0.03)],
            _ => vec![BandValue::Detected(2.0), BandValue::Limit(0.1)],
        };
        let e = shares_at(&bands, 1.2, with_limit).unwrap();
        assert!((e.companion_share - 0.1 / 2.1).abs() < 1e-12);
        // No band can tell them: unknown.
        assert_eq!(
            shares_at(&bands, 1.2, |_| vec![
                BandValue::Detected(1.0),
                BandValue::None
            ]),
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
