//! Per-object science from the SEDs: α and class, A_V, dereddened fluxes,
//! photosphere and excess, colours and indices.
//!
//! Everything observed stays as read; dereddened values go to their own fields.
//! The photosphere and its excess use dereddened fluxes when the object has an
//! A_V, observed fluxes otherwise (recorded per object in `excess_dereddened`).

use std::collections::HashMap;
use std::path::Path;

use super::alpha::{AlphaFit, SedPoint, YsoClass, alpha_bounds, fit_alpha};
use super::colour::{Colour, colour, colour_from_mags};
use super::photosphere::{
    ColourTable, Photosphere, StellarKey, excess, flux_from_colour_jy, spectral_type_code,
};
use super::sed_table::{BandInfo, BandValue, FieldSeds};
use super::settings::{AvSource, ScienceSettings};
use crate::error::{Error, Result};

/// α of one SED and what it allows.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct AlphaResult {
    /// The fit, when ≥ 2 detections lie in the window.
    pub fit: Option<AlphaFit>,
    /// Class, when the fit has enough points spanning a factor ≥ 2 in λ.
    pub class: Option<YsoClass>,
    /// Lower bound on α from a limit bluer than every detection.
    pub lower_bound: Option<f64>,
    /// Upper bound on α from a limit redder than every detection.
    pub upper_bound: Option<f64>,
}

/// Per band results of one object.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct BandScience {
    /// Dereddened detected flux density, Jy.
    pub dered_flux_jy: Option<f64>,
    /// Its error, Jy (the observed error times the same factor).
    pub dered_flux_err_jy: Option<f64>,
    /// Photospheric flux density, Jy.
    pub phot_jy: Option<f64>,
    /// m_phot − m_obs, mag.
    pub excess_mag: Option<f64>,
    /// Excess significance χ.
    pub excess_chi: Option<f64>,
    /// Whether the excess passes the threshold (χ and floor).
    pub flagged: bool,
}

/// Everything computed for one object.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct ObjectScience {
    /// Observed α.
    pub alpha: AlphaResult,
    /// A_V used for this object, mag.
    pub av_mag: Option<f64>,
    /// α of the dereddened fluxes.
    pub alpha_dered: AlphaResult,
    /// Per band, in the order of [`FieldSeds::bands`].
    pub bands: Vec<BandScience>,
    /// Whether the photosphere and excess used dereddened fluxes.
    pub excess_dereddened: bool,
    /// Colours in the order of [`Science::colours`], observed.
    pub colours: Vec<Option<Colour>>,
    /// The same colours dereddened (measured or bound, shifted by E = A_blue − A_red).
    pub colours_dered: Vec<Option<f64>>,
    /// Strömgren b−y, m1, c1, mag.
    pub stromgren: Option<(f64, f64, f64)>,
    /// r − Hα and r − i with errors: ((value, err), (value, err)).
    pub halpha: (Option<Colour>, Option<Colour>),
}

/// The science of a field.
#[derive(Debug, Clone, PartialEq)]
pub struct Science {
    /// The settings used.
    pub settings: ScienceSettings,
    /// Colour band pairs, ordered (bluer, redder) as band indices.
    pub colours: Vec<(usize, usize)>,
    /// A/A_V per band (`None` where the law is undefined).
    pub a_over_av: Vec<Option<f64>>,
    /// One entry per object, in the order of [`FieldSeds::object_id`].
    pub objects: Vec<ObjectScience>,
}

/// The colour pairs of the settings as ordered band indices; neighbouring bands
/// by wavelength when none are given.
///
/// # Errors
/// A usage error naming a band the field does not have.
pub fn colour_pairs(seds: &FieldSeds, settings: &ScienceSettings) -> Result<Vec<(usize, usize)>> {
    let idx = |id: &str| {
        seds.band_index(id).ok_or_else(|| {
            Error::Usage(format!(
                "{}: no band \"{id}\" (the field has: {})",
                seds.path.display(),
                seds.bands
                    .iter()
                    .map(|b| b.id.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            ))
        })
    };
    if settings.colours.is_empty() {
        return Ok((1..seds.bands.len()).map(|i| (i - 1, i)).collect());
    }
    let mut out = Vec::new();
    for (a, b) in &settings.colours {
        let (i, j) = (idx(a)?, idx(b)?);
        // Bands are sorted by wavelength: the lower index is the bluer band.
        out.push((i.min(j), i.max(j)));
    }
    Ok(out)
}

/// Reads a CSV with columns `object_id` and `value_column` (numbers).
fn read_object_table(path: &Path, value_column: &str) -> Result<HashMap<String, f64>> {
    read_object_values(path, value_column, "a number", |t| t.parse().ok())
}

/// Reads a CSV with columns `object_id` and `spt` (spectral types, as numbers
/// of [`spectral_type_code`]).
fn read_spt_table(path: &Path) -> Result<HashMap<String, f64>> {
    read_object_values(
        path,
        "spt",
        "a spectral type such as K5 or M2.5",
        spectral_type_code,
    )
}

/// Reads a CSV with columns `object_id` and `value_column`, each value read by
/// `parse` (`None`: an error saying `expected`).
fn read_object_values(
    path: &Path,
    value_column: &str,
    expected: &str,
    parse: impl Fn(&str) -> Option<f64>,
) -> Result<HashMap<String, f64>> {
    let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
    let mut lines = text.lines();
    let header: Vec<&str> = lines
        .next()
        .unwrap_or("")
        .split(',')
        .map(str::trim)
        .collect();
    let col = |name: &str| {
        header.iter().position(|h| *h == name).ok_or_else(|| {
            Error::format(
                path,
                format!(
                    "expected columns object_id and {value_column}, found \"{}\"",
                    header.join(",")
                ),
            )
        })
    };
    let (ci, ca) = (col("object_id")?, col(value_column)?);
    let mut out = HashMap::new();
    for (row, line) in lines.enumerate() {
        if line.trim().is_empty() {
            continue;
        }
        let f: Vec<&str> = line.split(',').map(str::trim).collect();
        let text = f.get(ca).copied().unwrap_or("");
        let v: f64 = parse(text).ok_or_else(|| Error::BadValue {
            path: path.to_path_buf(),
            row: row as u64 + 1,
            column: value_column.into(),
            expected: expected.into(),
            found: text.into(),
        })?;
        out.insert(f.get(ci).copied().unwrap_or("").to_string(), v);
    }
    Ok(out)
}

/// α from detected flux points of `bands`/`values` in the window, with `scale`
/// per band applied to fluxes and errors (1 for observed values).
fn alpha_of(
    bands: &[BandInfo],
    values: &[BandValue],
    scale: &[Option<f64>],
    settings: &ScienceSettings,
) -> AlphaResult {
    let (lo, hi) = settings.alpha_window_um;
    let mut det = Vec::new();
    let mut lim = Vec::new();
    for ((b, v), s) in bands.iter().zip(values).zip(scale) {
        if b.wavelength_um < lo || b.wavelength_um > hi {
            continue;
        }
        if !settings.alpha_bands.is_empty() && !settings.alpha_bands.contains(&b.id) {
            continue;
        }
        let Some(s) = s else { continue };
        if let Some(f) = v.flux_jy.filter(|f| *f > 0.0) {
            det.push(SedPoint {
                wavelength_um: b.wavelength_um,
                flux_jy: f * s,
                flux_err_jy: v.flux_err_jy.map(|e| e * s),
            });
        } else if let Some(u) = v.ulim_jy.filter(|u| *u > 0.0) {
            lim.push((b.wavelength_um, u * s));
        }
    }
    let fit = fit_alpha(&det, settings.alpha_weighting);
    let span_ok = {
        let l = det.iter().map(|p| p.wavelength_um);
        let (mn, mx) = l.fold((f64::INFINITY, 0.0f64), |(a, b), x| (a.min(x), b.max(x)));
        mx >= 2.0 * mn
    };
    let class = fit
        .filter(|f| f.n_points >= settings.alpha_min_points && span_ok)
        .and_then(|f| YsoClass::greene_1994(f.alpha));
    let (lower_bound, upper_bound) = alpha_bounds(&det, &lim);
    AlphaResult {
        fit,
        class,
        lower_bound,
        upper_bound,
    }
}

/// Computes the science of `seds` with `settings`.
///
/// # Errors
/// A usage error for a band named in the settings that the field lacks; I/O or
/// format errors of an A_V table.
pub fn compute(seds: &FieldSeds, settings: &ScienceSettings) -> Result<Science> {
    let colours = colour_pairs(seds, settings)?;
    let need = |id: &str| -> Result<usize> {
        seds.band_index(id).ok_or_else(|| {
            Error::Usage(format!(
                "{}: no band \"{id}\" for the science settings",
                seds.path.display()
            ))
        })
    };
    let anchor = seds.band_index(&settings.anchor);
    let a_over_av: Vec<Option<f64>> = seds
        .bands
        .iter()
        .map(|b| settings.law.a_over_av(b.wavelength_um))
        .collect();
    let av_table = match &settings.av {
        AvSource::Table(p) => Some(read_object_table(p, "av_mag")?),
        _ => None,
    };
    let av_colour = match &settings.av {
        AvSource::Colour {
            blue,
            red,
            intrinsic_mag,
        } => Some((need(blue)?, need(red)?, *intrinsic_mag)),
        _ => None,
    };
    let teff_table = match &settings.teff_table {
        Some(p) => Some(read_object_table(p, "teff_k")?),
        None => None,
    };
    let colour_table = match (&settings.photosphere, &settings.colour_table) {
        (Photosphere::ColourTable { .. }, Some(p)) => Some(ColourTable::read(p, &settings.anchor)?),
        (Photosphere::ColourTable { .. }, None) => {
            return Err(Error::Usage(
                "photosphere = \"colour_table\" needs colour_table".into(),
            ));
        }
        _ => None,
    };
    let spt_table = match (&colour_table, &settings.spt_table) {
        (Some(_), Some(p)) => Some(read_spt_table(p)?),
        _ => None,
    };
    if let Some(t) = &colour_table {
        let wants_spt = spt_table.is_some()
            || matches!(
                settings.photosphere,
                Photosphere::ColourTable {
                    field: Some(StellarKey::Spt(_))
                }
            );
        let wants_teff = teff_table.is_some()
            || matches!(
                settings.photosphere,
                Photosphere::ColourTable {
                    field: Some(StellarKey::TeffK(_))
                }
            );
        for (wanted, rows, column) in [
            (wants_spt, &t.by_spt, "spt"),
            (wants_teff, &t.by_teff, "teff_k"),
        ] {
            if wanted && rows.is_empty() {
                return Err(Error::format(
                    &t.path,
                    format!(
                        "the settings look objects up by {column}, but the colour table has no {column} column (or no value in it)"
                    ),
                ));
            }
        }
    }
    let strom = ["strom_u", "strom_v", "strom_b", "strom_y"].map(|b| seds.band_index(b));
    let halpha = match &settings.halpha {
        Some(h) => Some((need(&h.r)?, need(&h.halpha)?, need(&h.i)?)),
        None => None,
    };
    let mut objects = Vec::with_capacity(seds.object_id.len());
    for (id, values) in seds.object_id.iter().zip(&seds.values) {
        let ones: Vec<Option<f64>> = vec![Some(1.0); values.len()];
        let alpha = alpha_of(&seds.bands, values, &ones, settings);
        let obs_colours: Vec<Option<Colour>> = colours
            .iter()
            .map(|&(i, j)| colour([&seds.bands[i], &seds.bands[j]], [&values[i], &values[j]]))
            .collect();
        let av_mag = match &settings.av {
            AvSource::None => None,
            AvSource::Field(v) => Some(*v),
            AvSource::Table(_) => av_table.as_ref().and_then(|t| t.get(id).copied()),
            AvSource::Colour { .. } => {
                let (b, r, c0) = av_colour.unwrap();
                let c = colour([&seds.bands[b], &seds.bands[r]], [&values[b], &values[r]])
                    .filter(|c| c.kind == super::colour::ColourKind::Measured);
                match (c, a_over_av[b], a_over_av[r]) {
                    (Some(c), Some(kb), Some(kr)) if kb > kr => {
                        Some(((c.value_mag - c0) / (kb - kr)).max(0.0))
                    }
                    _ => None,
                }
            }
        };
        let scale: Vec<Option<f64>> = a_over_av
            .iter()
            .map(|k| match (av_mag, k) {
                (Some(av), Some(k)) => Some(10f64.powf(0.4 * av * k)),
                _ => None,
            })
            .collect();
        let alpha_dered = if av_mag.is_some() {
            alpha_of(&seds.bands, values, &scale, settings)
        } else {
            AlphaResult::default()
        };
        let mut bands: Vec<BandScience> = values
            .iter()
            .zip(&scale)
            .map(|(v, s)| BandScience {
                dered_flux_jy: s.and_then(|s| v.flux_jy.map(|f| f * s)),
                dered_flux_err_jy: s.and_then(|s| v.flux_err_jy.map(|e| e * s)),
                ..BandScience::default()
            })
            .collect();
        // Photosphere and excess.
        let excess_dereddened = av_mag.is_some();
        let flux_for = |k: usize| -> Option<(f64, f64)> {
            let v = &values[k];
            let f = v.flux_jy.filter(|f| *f > 0.0)?;
            let e = v.flux_err_jy.unwrap_or(0.0);
            if excess_dereddened {
                let s = scale[k]?;
                Some((f * s, e * s))
            } else {
                Some((f, e))
            }
        };
        let photosphere = match (settings.photosphere, &teff_table) {
            (Photosphere::Blackbody { teff_k }, Some(t)) => Some(Photosphere::Blackbody {
                teff_k: t.get(id).copied().unwrap_or(teff_k),
            }),
            (Photosphere::ColourTable { field }, _) => {
                // The object's own spectral type, then its own T_eff, then the field's.
                let own = spt_table
                    .as_ref()
                    .and_then(|t| t.get(id))
                    .map(|c| StellarKey::Spt(*c))
                    .or_else(|| {
                        teff_table
                            .as_ref()
                            .and_then(|t| t.get(id))
                            .map(|t| StellarKey::TeffK(*t))
                    });
                own.or(field).map(|k| Photosphere::ColourTable { field: Some(k) })
            }
            (p, _) => Some(p),
        }
        .filter(|p| !matches!(p, Photosphere::Blackbody { teff_k } if teff_k.is_nan() || *teff_k <= 0.0));
        if let Some(a) = anchor
            && let Some(photosphere) = photosphere
            && let Some((fa, ea)) = flux_for(a)
        {
            let ab = &seds.bands[a];
            bands[a].phot_jy = Some(fa);
            for (k, b) in seds.bands.iter().enumerate() {
                if k == a {
                    continue;
                }
                let phot = match (photosphere, &colour_table) {
                    (Photosphere::ColourTable { field: Some(key) }, Some(table)) => {
                        match (ab.zero_point_jy, b.zero_point_jy) {
                            (Some(f0a), Some(f0b)) => table
                                .band_minus_anchor_mag(key, &b.id)
                                .map(|c| flux_from_colour_jy(f0a, fa, f0b, c)),
                            _ => None,
                        }
                    }
                    _ => photosphere.flux_jy(
                        (ab.wavelength_um, ab.zero_point_jy, fa),
                        b.wavelength_um,
                        b.zero_point_jy,
                        b.system == "vega",
                    ),
                };
                let Some(phot) = phot else {
                    continue;
                };
                bands[k].phot_jy = Some(phot);
                let phot_err = phot * (ea / fa).hypot(settings.photosphere_error);
                if let Some((f, e)) = flux_for(k)
                    && let Some(x) = excess(f, e, phot, phot_err)
                {
                    bands[k].excess_mag = Some(x.excess_mag);
                    bands[k].excess_chi = Some(x.chi);
                    bands[k].flagged =
                        x.chi >= settings.excess_sigma && x.excess_mag >= settings.excess_floor_mag;
                }
            }
        }
        let colours_dered = colours
            .iter()
            .zip(&obs_colours)
            .map(
                |(&(i, j), c)| match (c, av_mag, a_over_av[i], a_over_av[j]) {
                    (Some(c), Some(av), Some(ki), Some(kj)) => Some(c.value_mag - av * (ki - kj)),
                    _ => None,
                },
            )
            .collect();
        let stromgren = match strom {
            [Some(u), Some(v), Some(b), Some(y)] => {
                let m = |k: usize| values[k].detected_mag(&seds.bands[k]).map(|m| m.0);
                match (m(u), m(v), m(b), m(y)) {
                    (Some(u), Some(v), Some(b), Some(y)) => {
                        let idx = crate::photometry::stromgren::indices(u, v, b, y);
                        Some((idx.b_minus_y, idx.m1, idx.c1))
                    }
                    _ => None,
                }
            }
            _ => None,
        };
        let halpha_result = match halpha {
            Some((r, h, i)) => {
                let d = |k: usize| values[k].detected_mag(&seds.bands[k]);
                let l = |k: usize| values[k].limit_mag(&seds.bands[k]);
                // r − Hα is "r minus the narrow band", not ordered by wavelength.
                (
                    colour_from_mags(d(r), l(r), d(h), l(h)),
                    colour_from_mags(d(r), l(r), d(i), l(i)),
                )
            }
            None => (None, None),
        };
        objects.push(ObjectScience {
            alpha,
            av_mag,
            alpha_dered,
            bands,
            excess_dereddened,
            colours: obs_colours,
            colours_dered,
            stromgren,
            halpha: halpha_result,
        });
    }
    Ok(Science {
        settings: settings.clone(),
        colours,
        a_over_av,
        objects,
    })
}

impl ObjectScience {
    /// Whether any band redder than the anchor (`anchor_wavelength_um`) is flagged.
    pub fn ir_excess(&self, bands: &[BandInfo], anchor_wavelength_um: f64) -> bool {
        self.flagged_bands(bands, |l| l > anchor_wavelength_um)
            .next()
            .is_some()
    }

    /// Bands whose excess is flagged and whose wavelength passes `keep`.
    pub fn flagged_bands<'a>(
        &'a self,
        bands: &'a [BandInfo],
        keep: impl Fn(f64) -> bool + 'a,
    ) -> impl Iterator<Item = &'a str> + 'a {
        bands
            .iter()
            .zip(&self.bands)
            .filter(move |(b, s)| s.flagged && keep(b.wavelength_um))
            .map(|(b, _)| b.id.as_str())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::science::settings::HalphaBands;

    fn band(id: &str, system: &str, l: f64, f0: Option<f64>) -> BandInfo {
        BandInfo {
            id: id.into(),
            system: system.into(),
            name: id.into(),
            wavelength_um: l,
            zero_point_jy: f0,
            ..BandInfo::default()
        }
    }

    fn flux(f0: f64, m: f64) -> BandValue {
        let f = f0 * 10f64.powf(-0.4 * m);
        BandValue {
            flux_jy: Some(f),
            flux_err_jy: Some(0.01 * f),
            ..BandValue::default()
        }
    }

    fn mag(m: f64) -> BandValue {
        BandValue {
            mag: Some(m),
            mag_err: Some(0.01),
            ..BandValue::default()
        }
    }

    /// One object: Strömgren u v b y (magnitude-only), AB r, Hα, i, 2MASS J H Ks.
    fn field() -> FieldSeds {
        let bands = vec![
            band("strom_u", "vega", 0.35, None),
            band("strom_v", "vega", 0.41, None),
            band("strom_b", "vega", 0.47, None),
            band("strom_y", "vega", 0.55, None),
            band("sdss_r", "ab", 0.6166, Some(3631.0)),
            band("halpha", "ab", 0.6563, Some(3631.0)),
            band("sdss_i", "ab", 0.7480, Some(3631.0)),
            band("tmass_j", "vega", 1.235, Some(1594.0)),
            band("tmass_h", "vega", 1.662, Some(1024.0)),
            band("tmass_ks", "vega", 2.159, Some(666.7)),
        ];
        // Intrinsic J − H = 0.6 reddened by A_V = 2 with O'Donnell 1994 / CCM89 (R_V = 3.1):
        // E(J − H) = 2 × (0.2876 − 0.1783) (FIELD §3.3).
        let law = ExtinctionLawCheck::new();
        let jh = 0.6 + 2.0 * (law.j - law.h);
        let values = vec![vec![
            mag(10.0),
            mag(9.5),
            mag(9.2),
            mag(9.0),
            flux(3631.0, 23.9),
            // Twice the r flux density in Hα: r − Hα = 2.5 log10 2 (AB both).
            BandValue {
                flux_jy: Some(2.0 * 3631.0 * 10f64.powf(-0.4 * 23.9)),
                flux_err_jy: None,
                ..BandValue::default()
            },
            flux(3631.0, 23.7),
            flux(1594.0, 10.0 + jh),
            flux(1024.0, 10.0),
            flux(666.7, 9.7),
        ]];
        FieldSeds {
            path: "objects.parquet".into(),
            bands,
            object_id: vec!["a:1".into()],
            values,
            metadata: Vec::new(),
        }
    }

    struct ExtinctionLawCheck {
        j: f64,
        h: f64,
        ks: f64,
    }

    impl ExtinctionLawCheck {
        fn new() -> Self {
            let law = crate::science::extinction::ExtinctionLaw::default();
            ExtinctionLawCheck {
                j: law.a_over_av(1.235).unwrap(),
                h: law.a_over_av(1.662).unwrap(),
                ks: law.a_over_av(2.159).unwrap(),
            }
        }
    }

    #[test]
    fn indices_av_from_colour_and_dereddened_colours() {
        let seds = field();
        let settings = ScienceSettings {
            av: AvSource::Colour {
                blue: "tmass_j".into(),
                red: "tmass_h".into(),
                intrinsic_mag: 0.6,
            },
            colours: vec![("tmass_ks".into(), "tmass_h".into())],
            halpha: Some(HalphaBands {
                r: "sdss_r".into(),
                halpha: "halpha".into(),
                i: "sdss_i".into(),
            }),
            ..ScienceSettings::default()
        };
        let sci = compute(&seds, &settings).unwrap();
        let o = &sci.objects[0];
        // Strömgren example of src/photometry/stromgren.rs: b−y 0.2, m1 0.1, c1 0.2.
        let (by, m1, c1) = o.stromgren.unwrap();
        assert!((by - 0.2).abs() < 1e-9 && (m1 - 0.1).abs() < 1e-9 && (c1 - 0.2).abs() < 1e-9);
        // r − Hα = 2.5 log10 2 = 0.7526 mag; r − i = 23.9 − 23.7 = 0.2 mag.
        let (rh, ri) = o.halpha;
        assert!((rh.unwrap().value_mag - 0.752_574_99).abs() < 1e-6);
        assert_eq!(rh.unwrap().err_mag, None);
        assert!((ri.unwrap().value_mag - 0.2).abs() < 1e-9);
        // A_V recovered from J − H against its intrinsic 0.6.
        assert!((o.av_mag.unwrap() - 2.0).abs() < 1e-9);
        // The colour is ordered bluer minus redder whatever the order asked: H − Ks.
        assert_eq!(sci.colours, vec![(8, 9)]);
        let c = o.colours[0].unwrap();
        assert!((c.value_mag - 0.3).abs() < 1e-9);
        let law = ExtinctionLawCheck::new();
        let dered = o.colours_dered[0].unwrap();
        assert!((dered - (0.3 - 2.0 * (law.h - law.ks))).abs() < 1e-9);
        // Dereddened flux: F · 10^(0.4 A_V A_Ks/A_V); the observed flux is untouched.
        let ks_obs = seds.values[0][9].flux_jy.unwrap();
        let ks_dered = o.bands[9].dered_flux_jy.unwrap();
        assert!((ks_dered / ks_obs - 10f64.powf(0.4 * 2.0 * law.ks)).abs() < 1e-12);
    }

    #[test]
    fn a_colour_table_photosphere_follows_each_objects_key() {
        let dir = tempfile::tempdir().unwrap();
        let write = |name: &str, text: &str| {
            let p = dir.path().join(name);
            std::fs::write(&p, text).unwrap();
            p
        };
        // Colours invented for this test.
        let table = write(
            "colours.csv",
            "# invented\nspt,teff_k,tmass_j-tmass_ks,tmass_ks-wise_w1\nK7,4000,0.80,0.10\nK2,5000,0.60,0.04\n",
        );
        let teff = write("teff.csv", "object_id,teff_k\na:1,4250\n");
        let spt = write("spt.csv", "object_id,spt\na:2,K4.5\n");
        let bands = vec![
            band("tmass_j", "vega", 1.235, Some(1594.0)),
            band("tmass_ks", "vega", 2.159, Some(666.7)),
            band("wise_w1", "vega", 3.3526, Some(309.540)),
        ];
        let one = vec![flux(1594.0, 10.8), flux(666.7, 10.0), flux(309.540, 9.0)];
        let seds = FieldSeds {
            path: "objects.parquet".into(),
            bands,
            object_id: vec!["a:1".into(), "a:2".into(), "a:3".into()],
            values: vec![one.clone(), one.clone(), one],
            metadata: Vec::new(),
        };
        let settings = ScienceSettings {
            photosphere: Photosphere::ColourTable { field: None },
            colour_table: Some(table),
            teff_table: Some(teff),
            spt_table: Some(spt),
            ..ScienceSettings::default()
        };
        let sci = compute(&seds, &settings).unwrap();
        let phot_mjy = |o: usize, b: usize| sci.objects[o].bands[b].phot_jy.map(|f| f * 1e3);
        // Ks = 10 → 66.67 mJy (FIELD §7.1). a:1 at 4250 K, a quarter of the way
        // from 4000 K to 5000 K: J − Ks = 0.80 − 0.25 × 0.20 = 0.75, so
        // F_J = 1594 Jy × 10^(−0.4 × 10.75) = 79.889 mJy; Ks − W1 = 0.10 − 0.25 × 0.06
        // = 0.085, so W1 = 9.915 and F_W1 = 309.54 Jy × 10^(−0.4 × 9.915) = 33.475 mJy.
        assert!((phot_mjy(0, 0).unwrap() - 79.889).abs() < 1e-3);
        assert!((phot_mjy(0, 1).unwrap() - 66.67).abs() < 1e-9);
        assert!((phot_mjy(0, 2).unwrap() - 33.475).abs() < 1e-3);
        // a:2 is K4.5 (54.5), half way from K2 (52) to K7 (57): Ks − W1 = 0.07,
        // F_W1 = 309.54 Jy × 10^(−0.4 × 9.93) = 33.015 mJy.
        assert!((phot_mjy(1, 2).unwrap() - 33.015).abs() < 1e-3);
        // a:3 is in neither table and the field has no key: no photosphere.
        assert_eq!(phot_mjy(2, 2), None);
        assert_eq!(sci.objects[2].bands[2].excess_mag, None);
        // W1 observed at 9.0 against 9.915: excess 0.915 mag, flagged.
        let w1 = sci.objects[0].bands[2];
        assert!((w1.excess_mag.unwrap() - 0.915).abs() < 1e-9);
        assert!(w1.flagged);
        // A table without spt values cannot serve an spt_table.
        let no_spt = write("teff_only.csv", "teff_k,tmass_ks-wise_w1\n4000,0.1\n");
        let e = compute(
            &seds,
            &ScienceSettings {
                colour_table: Some(no_spt.clone()),
                ..settings.clone()
            },
        )
        .unwrap_err();
        assert_eq!(
            e.to_string(),
            format!(
                "{}: the settings look objects up by spt, but the colour table has no spt column (or no value in it)",
                no_spt.display()
            )
        );
    }

    #[test]
    fn an_unknown_band_in_the_settings_is_named() {
        let seds = field();
        let settings = ScienceSettings {
            colours: vec![("tmass_j".into(), "wise_w9".into())],
            ..ScienceSettings::default()
        };
        assert_eq!(
            compute(&seds, &settings).unwrap_err().to_string(),
            "objects.parquet: no band \"wise_w9\" (the field has: strom_u, strom_v, strom_b, strom_y, sdss_r, halpha, sdss_i, tmass_j, tmass_h, tmass_ks)"
        );
    }
}
