//! A stellar photosphere anchored on one band, and the excess over it.
//!
//! The photosphere is scaled to the anchor band's detected flux density and
//! extrapolated to every other band by one of three assumptions:
//!
//! - [`Photosphere::RayleighJeans`]: F_ν(λ) = F_ν(anchor)·(λ_anchor/λ)², α = −3
//!   (FIELD §4.4). Assumes the anchor is already on the Rayleigh–Jeans tail; for
//!   hot stars it is not, and RJ from Ks under-predicts the mid-infrared
//!   photosphere by 12–27 % (FIELD §4.4), which inflates excesses.
//! - [`Photosphere::Blackbody`]: F_ν ∝ B_ν(T_eff) (Planck law), one T_eff for
//!   the field. Assumes a blackbody, ignores molecular bands of cool stars.
//! - [`Photosphere::ZeroVegaColour`]: every Vega colour with the anchor is 0,
//!   F_ν(band) = F0(band)·F_ν(anchor)/F0(anchor). This is the photospheric
//!   colour of A–K stars in the infrared (≈ 0 mag, FIELD §4.5); it is wrong in
//!   the optical for anything but A0V stars, and AB bands get no value.
//! - [`Photosphere::ColourTable`]: the intrinsic colour with the anchor that a
//!   user's [`ColourTable`] gives for the object's T_eff or spectral type,
//!   m(band) = m(anchor) + (m(band) − m(anchor))₀, so
//!   F_ν(band) = F0(band)·(F_ν(anchor)/F0(anchor))·10^(−0.4 (m(band) − m(anchor))₀)
//!   ([`flux_from_colour_jy`]). Assumes the table describes the object's kind of
//!   star (dwarfs, giants...) and that the anchor is photospheric; interpolated
//!   linearly between rows, never extrapolated (an object outside the table's
//!   range gets no photosphere in that band). As good as the table: a
//!   published one (e.g. Pecaut & Mamajek 2013, ApJS 208, 9, Table 5 (from
//!   memory)) includes the molecular bands of cool stars that a blackbody
//!   misses.
//!
//! Excess per band: E = m_phot − m_obs (positive = brighter than the
//! photosphere), χ = (F_obs − F_phot)/sqrt(σ_obs² + σ_phot²) (FIELD §4.5), with
//! σ_phot the anchor's relative error times F_phot plus a relative model
//! uncertainty in quadrature.

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// Planck constant × c / k_B = 14387.77 µm K (second radiation constant, CODATA 2018:
/// h c / k = 1.438776877e-2 m K).
pub const C2_UM_K: f64 = 14_387.768_77;

/// The photosphere assumption.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Photosphere {
    /// F_ν ∝ λ⁻².
    RayleighJeans,
    /// F_ν ∝ B_ν(T) with this temperature, K.
    Blackbody {
        /// Effective temperature, K.
        teff_k: f64,
    },
    /// Vega colours relative to the anchor are zero.
    ZeroVegaColour,
    /// Intrinsic colours from a [`ColourTable`] at each object's T_eff or
    /// spectral type; `field` is the key of objects the per-object tables do
    /// not list (`None`: such objects get no photosphere).
    ColourTable {
        /// The field's T_eff or spectral type.
        field: Option<StellarKey>,
    },
}

/// What a colour table is looked up by.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum StellarKey {
    /// Effective temperature, K.
    TeffK(f64),
    /// Spectral type on the numeric scale of [`spectral_type_code`].
    Spt(f64),
}

impl Photosphere {
    /// A description for metadata.
    pub fn describe(&self) -> String {
        match self {
            Photosphere::RayleighJeans => {
                "Rayleigh-Jeans F_nu ∝ λ^-2 from the anchor (under-predicts hot photospheres by 12-27 % in the mid-infrared)".to_string()
            }
            Photosphere::Blackbody { teff_k } if teff_k.is_nan() => {
                "blackbody of each object's T_eff scaled to the anchor".to_string()
            }
            Photosphere::Blackbody { teff_k } => {
                format!("blackbody of T_eff = {teff_k} K scaled to the anchor")
            }
            Photosphere::ZeroVegaColour => {
                "zero Vega colour with the anchor (A-K photospheres in the infrared; no value for AB bands)".to_string()
            }
            Photosphere::ColourTable { field } => format!(
                "intrinsic colours with the anchor from a colour table, interpolated linearly in T_eff or in the numeric spectral type (O0 = 0, B0 = 10, A0 = 20, F0 = 30, G0 = 40, K0 = 50, M0 = 60, L0 = 70, T0 = 80, Y0 = 90), not extrapolated{}",
                match field {
                    None => String::new(),
                    Some(StellarKey::TeffK(t)) => format!("; field T_eff = {t} K"),
                    Some(StellarKey::Spt(c)) => {
                        format!("; field spectral type {c} on that scale")
                    }
                }
            ),
        }
    }

    /// Photospheric flux density at band (λ, F0, is Vega) given the anchor's
    /// (λ, F0, flux). `None` where the assumption gives nothing.
    pub fn flux_jy(
        &self,
        anchor: (f64, Option<f64>, f64),
        band_wavelength_um: f64,
        band_zero_point_jy: Option<f64>,
        band_is_vega: bool,
    ) -> Option<f64> {
        let (la, f0a, fa) = anchor;
        match self {
            Photosphere::RayleighJeans => Some(fa * (la / band_wavelength_um).powi(2)),
            Photosphere::Blackbody { teff_k } => Some(
                fa * planck_nu_shape(band_wavelength_um, *teff_k) / planck_nu_shape(la, *teff_k),
            ),
            Photosphere::ZeroVegaColour => {
                if band_is_vega {
                    Some(band_zero_point_jy? * fa / f0a?)
                } else {
                    None
                }
            }
            // The colour depends on the object: see `flux_from_colour_jy`.
            Photosphere::ColourTable { .. } => None,
        }
    }
}

/// Photospheric flux density in a band from the anchor's zero point and flux
/// density, the band's zero point and the intrinsic colour
/// `band_minus_anchor_mag` = (m(band) − m(anchor))₀, each band in its own system:
/// F_ν(band) = F0(band)·(F_ν(anchor)/F0(anchor))·10^(−0.4 colour).
pub fn flux_from_colour_jy(
    anchor_zero_point_jy: f64,
    anchor_flux_jy: f64,
    band_zero_point_jy: f64,
    band_minus_anchor_mag: f64,
) -> f64 {
    band_zero_point_jy * anchor_flux_jy / anchor_zero_point_jy
        * 10f64.powf(-0.4 * band_minus_anchor_mag)
}

/// The spectral classes in temperature order, ten units apart on the numeric
/// scale (common practice: O0 = 0 … M0 = 60, L0 = 70, T0 = 80, Y0 = 90).
const SPECTRAL_CLASSES: &str = "OBAFGKMLTY";

/// A spectral type on a numeric scale: 10 × (place of the class letter in
/// O B A F G K M L T Y) + subtype, e.g. "A0" → 20, "K5" → 55, "M2.5" → 62.5,
/// "K5V" → 55. The subtype is a number in [0, 10) with optional decimals; a
/// luminosity class after it (letters I, V, a, b, possibly after a space) is
/// accepted and ignored, so the table must be one for the objects' class.
/// `None` for anything else.
pub fn spectral_type_code(text: &str) -> Option<f64> {
    let t = text.trim();
    let mut chars = t.chars();
    let letter = chars.next()?.to_ascii_uppercase();
    let class = SPECTRAL_CLASSES.find(letter)? as f64;
    let rest = chars.as_str();
    let digits_end = rest
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .unwrap_or(rest.len());
    let (number, suffix) = rest.split_at(digits_end);
    if number.is_empty() || number.starts_with('.') || number.ends_with('.') {
        return None;
    }
    let subtype: f64 = number.parse().ok()?;
    if !(0.0..10.0).contains(&subtype) {
        return None;
    }
    let suffix = suffix.trim_start();
    if !suffix.chars().all(|c| matches!(c, 'I' | 'V' | 'a' | 'b')) {
        return None;
    }
    Some(10.0 * class + subtype)
}

/// One colour column of a [`ColourTable`]: (m(band) − m(anchor))₀ or its
/// negative, as the header wrote it.
#[derive(Debug, Clone, PartialEq)]
pub struct TableColour {
    /// The header text, e.g. `tmass_j-tmass_ks`.
    pub name: String,
    /// The band that is not the anchor.
    pub band: String,
    /// True for `anchor-band` columns, false for `band-anchor`.
    pub anchor_first: bool,
}

/// Intrinsic photospheric colours per T_eff and/or spectral type, read from a CSV:
///
/// ```text
/// # lines starting with '#' are comments (name the source of the values here)
/// spt,teff_k,tmass_j-tmass_ks,tmass_h-tmass_ks,tmass_ks-wise_w1
/// K5,4450,0.72,0.13,0.09
/// M0,3850,0.83,0.19,0.12
/// ```
///
/// A `teff_k` column (K, > 0) and/or an `spt` column (e.g. `K5`, `M2.5`; see
/// [`spectral_type_code`]); every other column is a colour of two band ids
/// joined by `-`, one of them the anchor band, bluer minus redder as written
/// (each band in its own system). Empty cells are unknown colours. Rows need
/// not be sorted; a key value may not repeat.
#[derive(Debug, Clone, PartialEq)]
pub struct ColourTable {
    /// The file read.
    pub path: PathBuf,
    /// The colour columns.
    pub colours: Vec<TableColour>,
    /// Rows by T_eff: (T_eff, colours), sorted by T_eff.
    pub by_teff: Vec<(f64, Vec<Option<f64>>)>,
    /// Rows by spectral type: (numeric type, colours), sorted.
    pub by_spt: Vec<(f64, Vec<Option<f64>>)>,
}

impl ColourTable {
    /// Reads the table at `path` for the anchor band `anchor`.
    ///
    /// # Errors
    /// I/O errors; format errors naming the file, row and column.
    pub fn read(path: &Path, anchor: &str) -> Result<ColourTable> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        ColourTable::parse(&text, path, anchor)
    }

    /// Parses the table `text` (`path` is used in messages).
    ///
    /// # Errors
    /// As [`ColourTable::read`].
    pub fn parse(text: &str, path: &Path, anchor: &str) -> Result<ColourTable> {
        let mut lines = text
            .lines()
            .enumerate()
            .filter(|(_, l)| !l.trim_start().starts_with('#') && !l.trim().is_empty());
        let Some((_, header)) = lines.next() else {
            return Err(Error::format(
                path,
                "no header line; expected teff_k and/or spt, then colour columns such as tmass_j-tmass_ks",
            ));
        };
        let names: Vec<&str> = header.split(',').map(str::trim).collect();
        let (mut teff_col, mut spt_col) = (None, None);
        let mut colours = Vec::new();
        let mut colour_cols = Vec::new();
        for (i, name) in names.iter().enumerate() {
            match *name {
                "teff_k" => teff_col = Some(i),
                "spt" => spt_col = Some(i),
                other => {
                    let parts = other.split_once('-');
                    let colour = match parts {
                        Some((a, b)) if a == anchor && !b.is_empty() && b != anchor => {
                            TableColour {
                                name: other.to_string(),
                                band: b.to_string(),
                                anchor_first: true,
                            }
                        }
                        Some((a, b)) if b == anchor && !a.is_empty() && a != anchor => {
                            TableColour {
                                name: other.to_string(),
                                band: a.to_string(),
                                anchor_first: false,
                            }
                        }
                        _ => {
                            return Err(Error::format(
                                path,
                                format!(
                                    "column \"{other}\": expected teff_k, spt or a colour \"band-{anchor}\" / \"{anchor}-band\" with the anchor band {anchor}"
                                ),
                            ));
                        }
                    };
                    colours.push(colour);
                    colour_cols.push(i);
                }
            }
        }
        if teff_col.is_none() && spt_col.is_none() {
            return Err(Error::format(
                path,
                format!(
                    "expected a teff_k or an spt column, found \"{}\"",
                    names.join(",")
                ),
            ));
        }
        if colours.is_empty() {
            return Err(Error::format(
                path,
                format!(
                    "no colour columns (such as tmass_j-{anchor}) in \"{}\"",
                    names.join(",")
                ),
            ));
        }
        let mut table = ColourTable {
            path: path.to_path_buf(),
            colours,
            by_teff: Vec::new(),
            by_spt: Vec::new(),
        };
        for (data_row, (_, text)) in lines.enumerate() {
            let row = data_row as u64 + 1;
            let cells: Vec<&str> = text.split(',').map(str::trim).collect();
            let bad = |column: &str, expected: &str, found: &str| Error::BadValue {
                path: path.to_path_buf(),
                row,
                column: column.into(),
                expected: expected.into(),
                found: found.into(),
            };
            if cells.len() != names.len() {
                return Err(Error::format(
                    path,
                    format!(
                        "row {row}: expected {} fields as in the header, found {}",
                        names.len(),
                        cells.len()
                    ),
                ));
            }
            let mut values = Vec::with_capacity(colour_cols.len());
            for &c in &colour_cols {
                let cell = cells[c];
                values.push(if cell.is_empty() {
                    None
                } else {
                    Some(
                        cell.parse::<f64>()
                            .ok()
                            .filter(|v| v.is_finite())
                            .ok_or_else(|| bad(names[c], "a colour in mag, or nothing", cell))?,
                    )
                });
            }
            let teff = match teff_col.map(|c| cells[c]).filter(|t| !t.is_empty()) {
                Some(t) => Some(
                    t.parse::<f64>()
                        .ok()
                        .filter(|v| v.is_finite() && *v > 0.0)
                        .ok_or_else(|| bad("teff_k", "a temperature in K above 0", t))?,
                ),
                None => None,
            };
            let spt = match spt_col.map(|c| cells[c]).filter(|t| !t.is_empty()) {
                Some(t) => Some(
                    spectral_type_code(t)
                        .ok_or_else(|| bad("spt", "a spectral type such as K5 or M2.5", t))?,
                ),
                None => None,
            };
            if teff.is_none() && spt.is_none() {
                return Err(bad("teff_k", "a teff_k or an spt value", ""));
            }
            for (key, column, rows) in [
                (teff, "teff_k", &mut table.by_teff),
                (spt, "spt", &mut table.by_spt),
            ] {
                if let Some(k) = key {
                    if rows.iter().any(|r| r.0 == k) {
                        let found = names
                            .iter()
                            .position(|n| *n == column)
                            .map_or("", |i| cells[i]);
                        return Err(bad(column, "a value no other row has", found));
                    }
                    rows.push((k, values.clone()));
                }
            }
        }
        table.by_teff.sort_by(|a, b| a.0.total_cmp(&b.0));
        table.by_spt.sort_by(|a, b| a.0.total_cmp(&b.0));
        Ok(table)
    }

    /// (m(band) − m(anchor))₀ for band `band` at `key`, interpolated linearly
    /// between the two nearest rows that give this colour; `None` when the
    /// table has no such colour or the key lies outside its rows.
    pub fn band_minus_anchor_mag(&self, key: StellarKey, band: &str) -> Option<f64> {
        let c = self.colours.iter().position(|c| c.band == band)?;
        let (k, rows) = match key {
            StellarKey::TeffK(t) => (t, &self.by_teff),
            StellarKey::Spt(s) => (s, &self.by_spt),
        };
        let points: Vec<(f64, f64)> = rows
            .iter()
            .filter_map(|(x, v)| v[c].map(|y| (*x, y)))
            .collect();
        let value = interpolate(&points, k)?;
        Some(if self.colours[c].anchor_first {
            -value
        } else {
            value
        })
    }
}

/// Linear interpolation in `points` (sorted by x) at `x`; `None` outside
/// [first x, last x] or for NaN.
pub fn interpolate(points: &[(f64, f64)], x: f64) -> Option<f64> {
    let i = points.iter().position(|p| p.0 >= x)?;
    let (x1, y1) = points[i];
    if x1 == x {
        return Some(y1);
    }
    let (x0, y0) = *points.get(i.checked_sub(1)?)?;
    Some(y0 + (y1 - y0) * (x - x0) / (x1 - x0))
}

/// B_ν(T) up to a constant: ν³ / (exp(hν/kT) − 1) with ν ∝ 1/λ.
fn planck_nu_shape(wavelength_um: f64, teff_k: f64) -> f64 {
    let x = C2_UM_K / (wavelength_um * teff_k);
    wavelength_um.powi(-3) / x.exp_m1()
}

/// The excess of one band over the photosphere.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Excess {
    /// m_phot − m_obs, mag (> 0: brighter than the photosphere).
    pub excess_mag: f64,
    /// χ = (F_obs − F_phot)/sqrt(σ_obs² + σ_phot²).
    pub chi: f64,
}

/// Excess of an observed flux over a photospheric one (both Jy, errors 1σ).
pub fn excess(obs_jy: f64, obs_err_jy: f64, phot_jy: f64, phot_err_jy: f64) -> Option<Excess> {
    if obs_jy <= 0.0 || phot_jy <= 0.0 {
        return None;
    }
    let sigma = obs_err_jy.hypot(phot_err_jy);
    Some(Excess {
        excess_mag: 2.5 * (obs_jy / phot_jy).log10(),
        chi: if sigma > 0.0 {
            (obs_jy - phot_jy) / sigma
        } else {
            f64::INFINITY.copysign(obs_jy - phot_jy)
        },
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rayleigh_jeans_from_ks_matches_the_worked_example() {
        // FIELD §4.4: Ks = 10 (66.67 mJy) → RJ at 23.675 µm is 0.5544 mJy, whereas
        // Ks − [24] = 0 implies 0.717 mJy.
        let anchor = (2.159, Some(666.7), 0.06667);
        let rj = Photosphere::RayleighJeans
            .flux_jy(anchor, 23.675, Some(7.17), true)
            .unwrap();
        assert!((rj * 1e3 - 0.5544).abs() < 5e-4, "{rj}");
        let zero = Photosphere::ZeroVegaColour
            .flux_jy(anchor, 23.675, Some(7.17), true)
            .unwrap();
        assert!((zero * 1e3 - 0.717).abs() < 5e-4, "{zero}");
        assert_eq!(
            Photosphere::ZeroVegaColour.flux_jy(anchor, 0.6166, Some(3631.0), false),
            None
        );
    }

    #[test]
    fn hot_blackbody_tends_to_rayleigh_jeans() {
        let anchor = (2.159, Some(666.7), 0.06667);
        let bb = Photosphere::Blackbody { teff_k: 1e7 }
            .flux_jy(anchor, 23.675, None, true)
            .unwrap();
        let rj = Photosphere::RayleighJeans
            .flux_jy(anchor, 23.675, None, true)
            .unwrap();
        assert!((bb / rj - 1.0).abs() < 1e-3);
        // A 9600 K blackbody lies above RJ at 24 µm (Ks not yet on the tail, FIELD §4.4).
        let bb = Photosphere::Blackbody { teff_k: 9600.0 }
            .flux_jy(anchor, 23.675, None, true)
            .unwrap();
        assert!(bb > rj * 1.1);
    }

    #[test]
    fn spectral_types_map_to_the_numeric_scale() {
        assert_eq!(spectral_type_code("A0"), Some(20.0));
        assert_eq!(spectral_type_code("K5"), Some(55.0));
        assert_eq!(spectral_type_code("M2.5"), Some(62.5));
        assert_eq!(spectral_type_code(" K5V "), Some(55.0));
        assert_eq!(spectral_type_code("G2 V"), Some(42.0));
        assert_eq!(spectral_type_code("k7"), Some(57.0));
        assert_eq!(spectral_type_code("L3"), Some(73.0));
        for bad in ["", "K", "Q5", "K10", "K-1", "K5.", "M.5", "K5 dwarf", "5K"] {
            assert_eq!(spectral_type_code(bad), None, "{bad}");
        }
    }

    #[test]
    fn interpolation_is_linear_inside_and_absent_outside() {
        let pts = [(3000.0, 1.0), (4000.0, 0.5), (6000.0, 0.1)];
        assert_eq!(interpolate(&pts, 3000.0), Some(1.0));
        assert_eq!(interpolate(&pts, 6000.0), Some(0.1));
        // A quarter of the way from 4000 K to 6000 K: 0.5 + 0.25 × (0.1 − 0.5) = 0.4.
        assert!((interpolate(&pts, 4500.0).unwrap() - 0.4).abs() < 1e-12);
        assert_eq!(interpolate(&pts, 2999.0), None);
        assert_eq!(interpolate(&pts, 6001.0), None);
        assert_eq!(interpolate(&pts, f64::NAN), None);
        assert_eq!(interpolate(&[], 1.0), None);
    }

    const TABLE: &str = "# invented for this test\n\
        spt,teff_k,tmass_j-tmass_ks,tmass_ks-wise_w1\n\
        M0,3850,0.83,\n\
        K5,4450,0.72,0.09\n\
        ,5000,,0.04\n";

    #[test]
    fn a_colour_table_reads_both_keys_and_signs_its_colours() {
        let t = ColourTable::parse(TABLE, Path::new("c.csv"), "tmass_ks").unwrap();
        assert_eq!(t.by_teff.len(), 3);
        assert_eq!(t.by_spt.len(), 2);
        let ks = |key| t.band_minus_anchor_mag(key, "tmass_j");
        // J − Ks as written; K7 lies 2/5 of the way from K5 (55) to M0 (60):
        // 0.72 + 0.4 × (0.83 − 0.72) = 0.764.
        assert!((ks(StellarKey::Spt(57.0)).unwrap() - 0.764).abs() < 1e-12);
        assert_eq!(ks(StellarKey::Spt(55.0)), Some(0.72));
        // 5000 K has no J − Ks: 4450 K is the warmest row that gives it.
        assert_eq!(ks(StellarKey::TeffK(4700.0)), None);
        // Ks − W1 is anchor minus band: W1 − Ks is its negative. Between 4450 K
        // (0.09) and 5000 K (0.04) at 4725 K: 0.065, so W1 − Ks = −0.065.
        let w1 = t
            .band_minus_anchor_mag(StellarKey::TeffK(4725.0), "wise_w1")
            .unwrap();
        assert!((w1 + 0.065).abs() < 1e-12, "{w1}");
        // M0 has no Ks − W1, and K5 is the only type that has one.
        assert_eq!(
            t.band_minus_anchor_mag(StellarKey::Spt(60.0), "wise_w1"),
            None
        );
        assert_eq!(
            t.band_minus_anchor_mag(StellarKey::TeffK(4450.0), "irac_36"),
            None
        );
    }

    #[test]
    fn a_bad_colour_table_names_row_and_column() {
        let err = |text: &str| {
            ColourTable::parse(text, Path::new("c.csv"), "tmass_ks")
                .unwrap_err()
                .to_string()
        };
        assert_eq!(
            err("teff_k,tmass_j-tmass_h\n4000,0.5\n"),
            "c.csv: column \"tmass_j-tmass_h\": expected teff_k, spt or a colour \"band-tmass_ks\" / \"tmass_ks-band\" with the anchor band tmass_ks"
        );
        assert_eq!(
            err("tmass_j-tmass_ks\n0.5\n"),
            "c.csv: expected a teff_k or an spt column, found \"tmass_j-tmass_ks\""
        );
        assert_eq!(
            err("# source\nteff_k,tmass_j-tmass_ks\n4000,0.5\n5000,red\n"),
            "c.csv: row 2, column \"tmass_j-tmass_ks\": expected a colour in mag, or nothing, found \"red\""
        );
        assert_eq!(
            err("spt,tmass_j-tmass_ks\nK5,0.7\nX9,0.8\n"),
            "c.csv: row 2, column \"spt\": expected a spectral type such as K5 or M2.5, found \"X9\""
        );
        assert_eq!(
            err("teff_k,tmass_j-tmass_ks\n4000,0.5\n4000,0.6\n"),
            "c.csv: row 2, column \"teff_k\": expected a value no other row has, found \"4000\""
        );
        assert_eq!(
            err("teff_k,tmass_j-tmass_ks\n-40,0.5\n"),
            "c.csv: row 1, column \"teff_k\": expected a temperature in K above 0, found \"-40\""
        );
        assert_eq!(
            err("teff_k,tmass_j-tmass_ks\n4000\n"),
            "c.csv: row 1: expected 2 fields as in the header, found 1"
        );
    }

    #[test]
    fn the_demo_colour_table_is_the_blackbody_it_says_it_is() {
        // demo_catalogs/photosphere_colours_demo.csv is labelled as blackbody
        // colours through the built-in band library: recompute every value from
        // the Planck law here and compare (the file rounds to 0.001 mag).
        let text = include_str!("../../demo_catalogs/photosphere_colours_demo.csv");
        let t = ColourTable::parse(text, Path::new("demo.csv"), "tmass_ks").unwrap();
        let lib = crate::photometry::BandLibrary::builtin();
        let ks = lib.get("tmass_ks").unwrap();
        let ks_f0 = ks.zero_point_jy.unwrap();
        assert_eq!((t.by_teff.len(), t.colours.len()), (15, 11));
        for &(teff_k, _) in &t.by_teff {
            for c in &t.colours {
                let b = lib.get(&c.band).unwrap();
                let f0 = b.zero_point_jy.unwrap();
                // A Ks = 0 star: F(Ks) = F0(Ks).
                let f = Photosphere::Blackbody { teff_k }
                    .flux_jy(
                        (ks.wavelength_um, Some(ks_f0), ks_f0),
                        b.wavelength_um,
                        Some(f0),
                        true,
                    )
                    .unwrap();
                let want = -2.5 * (f / f0).log10();
                let got = t
                    .band_minus_anchor_mag(StellarKey::TeffK(teff_k), &c.band)
                    .unwrap();
                assert!(
                    (got - want).abs() < 6e-4,
                    "{teff_k} K {}: {got} vs {want}",
                    c.name
                );
            }
        }
    }

    #[test]
    fn a_colour_moves_the_anchor_magnitude() {
        // Ks = 10 (66.67 mJy, FIELD §7.1) and J − Ks = 0.70: J = 10.70, so
        // F_J = 1594 Jy × 10^(−0.4 × 10.70) = 83.654 mJy (computed here).
        let fj = flux_from_colour_jy(666.7, 0.06667, 1594.0, 0.70);
        assert!((fj * 1e3 - 83.654).abs() < 5e-3, "{fj}");
        // Zero colour is the zero-Vega-colour photosphere.
        let zero = Photosphere::ZeroVegaColour
            .flux_jy((2.159, Some(666.7), 0.06667), 1.235, Some(1594.0), true)
            .unwrap();
        assert!((flux_from_colour_jy(666.7, 0.06667, 1594.0, 0.0) / zero - 1.0).abs() < 1e-12);
    }

    #[test]
    fn excess_in_magnitudes_and_sigma() {
        // Twice the photosphere: 2.5 log10 2 = 0.7526 mag.
        let e = excess(2.0, 0.1, 1.0, 0.0).unwrap();
        assert!((e.excess_mag - 0.752_574_99).abs() < 1e-6);
        assert!((e.chi - 10.0).abs() < 1e-12);
        assert_eq!(excess(-1.0, 0.1, 1.0, 0.1), None);
    }
}
