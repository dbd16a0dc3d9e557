//! Colours between two bands, with errors and limits.
//!
//! A colour is the bluer band minus the redder band (FIELD §1.5, common
//! practice), each magnitude in its band's own system, m = −2.5 log10(F/F0),
//! with σ_c = sqrt(σ_blue² + σ_red²). An upper limit on a flux is a lower limit
//! on brightness: the magnitude is *at least* m_lim. So
//!
//! - blue band a limit, red detected: c = m_blue − m_red ≥ m_lim − m_red, a
//!   **lower** bound on the colour;
//! - red band a limit, blue detected: c ≤ m_blue − m_lim, an **upper** bound;
//! - both limits: no colour.

use super::sed_table::{BandInfo, BandValue};

/// Whether a colour value is a measurement or a bound.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ColourKind {
    /// Both bands detected.
    Measured,
    /// The true colour is ≥ the value (the bluer band is an upper limit).
    LowerBound,
    /// The true colour is ≤ the value (the redder band is an upper limit).
    UpperBound,
}

impl ColourKind {
    /// `measured`, `lower` or `upper`.
    pub fn as_str(&self) -> &'static str {
        match self {
            ColourKind::Measured => "measured",
            ColourKind::LowerBound => "lower",
            ColourKind::UpperBound => "upper",
        }
    }
}

/// A colour value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Colour {
    /// m_blue − m_red, mag.
    pub value_mag: f64,
    /// 1σ error of a measured colour (the detected band's error for a bound).
    pub err_mag: Option<f64>,
    /// Measurement or bound.
    pub kind: ColourKind,
}

/// The colour from two magnitudes (bluer first), each detected `(m, σ)` or a limit.
pub fn colour_from_mags(
    blue: Option<(f64, Option<f64>)>,
    blue_limit: Option<f64>,
    red: Option<(f64, Option<f64>)>,
    red_limit: Option<f64>,
) -> Option<Colour> {
    let quad = |a: Option<f64>, b: Option<f64>| match (a, b) {
        (Some(a), Some(b)) => Some(a.hypot(b)),
        _ => None,
    };
    match (blue, red) {
        (Some((mb, eb)), Some((mr, er))) => Some(Colour {
            value_mag: mb - mr,
            err_mag: quad(eb, er),
            kind: ColourKind::Measured,
        }),
        (None, Some((mr, er))) => blue_limit.map(|lim| Colour {
            value_mag: lim - mr,
            err_mag: er,
            kind: ColourKind::LowerBound,
        }),
        (Some((mb, eb)), None) => red_limit.map(|lim| Colour {
            value_mag: mb - lim,
            err_mag: eb,
            kind: ColourKind::UpperBound,
        }),
        (None, None) => None,
    }
}

/// The colour of bands `a` and `b` of one object, ordered bluer minus redder by
/// wavelength whatever order they are given in.
pub fn colour(bands: [&BandInfo; 2], values: [&BandValue; 2]) -> Option<Colour> {
    let (bi, ri) = if bands[0].wavelength_um <= bands[1].wavelength_um {
        (0, 1)
    } else {
        (1, 0)
    };
    colour_from_mags(
        values[bi].detected_mag(bands[bi]),
        values[bi].limit_mag(bands[bi]),
        values[ri].detected_mag(bands[ri]),
        values[ri].limit_mag(bands[ri]),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn band(id: &str, l: f64, f0: Option<f64>) -> BandInfo {
        BandInfo {
            id: id.into(),
            system: "vega".into(),
            name: id.into(),
            wavelength_um: l,
            zero_point_jy: f0,
            ..BandInfo::default()
        }
    }

    fn det(f: f64, e: f64) -> BandValue {
        BandValue {
            flux_jy: Some(f),
            flux_err_jy: Some(e),
            ..BandValue::default()
        }
    }

    #[test]
    fn colour_from_fluxes_uses_each_zero_point() {
        // FIELD §2: 2MASS H F0 = 1024 Jy, Ks F0 = 666.7 Jy. H = 10.5 and Ks = 10.0
        // (66.67 mJy, FIELD §7.1) give H − Ks = 0.5 whichever order the bands come in.
        let h = band("tmass_h", 1.662, Some(1024.0));
        let k = band("tmass_ks", 2.159, Some(666.7));
        let fh = 1024.0 * 10f64.powf(-0.4 * 10.5);
        let fk = 0.06667;
        let vh = det(fh, 0.9210340 * 0.04 * fh);
        let vk = det(fk, 0.001842);
        for c in [colour([&h, &k], [&vh, &vk]), colour([&k, &h], [&vk, &vh])] {
            let c = c.unwrap();
            assert!((c.value_mag - 0.5).abs() < 1e-6);
            assert!((c.err_mag.unwrap() - 0.05).abs() < 2e-4); // sqrt(0.04² + 0.03²)
            assert_eq!(c.kind, ColourKind::Measured);
        }
    }

    #[test]
    fn a_colour_with_a_limit_is_a_bound_the_right_way() {
        // Blue band limit m ≥ 15: c ≥ 15 − 12 = 3 (lower bound).
        let c = colour_from_mags(None, Some(15.0), Some((12.0, Some(0.1))), None).unwrap();
        assert_eq!((c.value_mag, c.kind), (3.0, ColourKind::LowerBound));
        // Red band limit m ≥ 11: c ≤ 12 − 11 = 1 (upper bound).
        let c = colour_from_mags(Some((12.0, Some(0.1))), None, None, Some(11.0)).unwrap();
        assert_eq!((c.value_mag, c.kind), (1.0, ColourKind::UpperBound));
        assert_eq!(colour_from_mags(None, Some(1.0), None, Some(2.0)), None);
    }
}
