//! The matcher's input: one [`SourceTable`] per catalog, holding only what
//! positional matching needs, in plain columns.
//!
//! A table is usually built from normalized source batches
//! ([`SourceTable::from_batches`]); tests build them directly.

use arrow::array::{Array, AsArray, RecordBatch};
use arrow::datatypes::Float64Type;

use crate::error::{Error, Result};

/// Positions, epochs, errors and proper motions of one catalog's sources.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SourceTable {
    /// Catalog name.
    pub name: String,
    /// Source identifiers (unique within the catalog).
    pub source_id: SourceIds,
    /// Right ascension at `epoch_yr`, degrees.
    pub ra_deg: Vec<f64>,
    /// Declination at `epoch_yr`, degrees.
    pub dec_deg: Vec<f64>,
    /// Epoch of the position, Julian years.
    pub epoch_yr: Vec<f64>,
    /// 1-sigma error ellipse semi-major axis, arcsec.
    pub err_major_arcsec: Vec<f64>,
    /// 1-sigma error ellipse semi-minor axis, arcsec.
    pub err_minor_arcsec: Vec<f64>,
    /// Error ellipse position angle, degrees east of north.
    pub err_pa_deg: Vec<f64>,
    /// Proper motion in RA including cos(dec), mas/yr; NaN when unknown.
    pub pmra_cosdec_masyr: Vec<f64>,
    /// Proper motion in Dec, mas/yr; NaN when unknown.
    pub pmdec_masyr: Vec<f64>,
    /// 1-sigma errors of the proper motion (μ_α cos δ, μ_δ), mas/yr; NaN when
    /// unknown; empty when the catalog gives none. They grow the positional
    /// error away from the source's epoch (see [`super::prepare::Sources::cov_at`]).
    pub pm_err_masyr: Vec<(f64, f64)>,
    /// True for rows measured by forced photometry (the normalized table's
    /// `forced` column); empty when the catalog has none. Read it through
    /// [`SourceTable::is_forced`].
    pub forced: Vec<bool>,
    /// True for extended rows (the normalized table's `extended` column, from
    /// a schema's `[position] extended`); empty when the catalog has none. Read
    /// it through [`SourceTable::is_extended`].
    pub extended: Vec<bool>,
    /// Per source, one [`BandValue`] code per band of the catalog's schema
    /// (row-major, `bands` entries a row); empty when not read
    /// ([`SourceTable::read_photometry`]). The matcher reads it for blends.
    pub photometry: Vec<f64>,
    /// Bands per row of `photometry`.
    pub bands: usize,
}

/// What a source's value in one band tells the blend decisions, as stored in
/// one `f64` ([`BandValue::code`], [`BandValue::from_code`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum BandValue {
    /// A detection with this flux density, Jy (> 0).
    Detected(f64),
    /// An upper limit on the flux density, Jy (> 0).
    Limit(f64),
    /// Measured in the band, but with no flux density to compare (a
    /// saturated value, or a magnitude-only band).
    Measured,
    /// No measurement (missing, not detected, rejected).
    None,
}

impl BandValue {
    /// The stored form: the flux for a detection, minus the limit for a limit,
    /// 0 for `Measured`, NaN for `None`.
    pub fn code(self) -> f64 {
        match self {
            BandValue::Detected(f) => f,
            BandValue::Limit(l) => -l,
            BandValue::Measured => 0.0,
            BandValue::None => f64::NAN,
        }
    }

    /// The value of a stored code.
    pub fn from_code(code: f64) -> BandValue {
        if code > 0.0 {
            BandValue::Detected(code)
        } else if code < 0.0 {
            BandValue::Limit(-code)
        } else if code == 0.0 {
            BandValue::Measured
        } else {
            BandValue::None
        }
    }

    /// True when the source was detected in the band (a flux or a saturated
    /// value): the band's image saw it, so its resolution applies to it.
    pub fn is_detection(self) -> bool {
        matches!(self, BandValue::Detected(_) | BandValue::Measured)
    }
}

impl SourceTable {
    /// [`SourceTable::from_batches`] with the band values of every band of
    /// `schema` ([`SourceTable::read_photometry`]), named after its survey.
    ///
    /// # Errors
    /// As [`SourceTable::from_batches`].
    pub fn from_normalized(
        schema: &crate::catalog::schema::SurveySchema,
        batches: &[RecordBatch],
        origin: &std::path::Path,
    ) -> Result<SourceTable> {
        let mut t = SourceTable::from_batches(&schema.survey, batches, origin)?;
        let bands: Vec<(String, bool)> = schema
            .bands
            .iter()
            .map(|b| (b.band.id.clone(), b.has_flux()))
            .collect();
        t.read_photometry(batches, &bands, origin)?;
        Ok(t)
    }

    /// Reads each band's value of every row of normalized `batches` (in the
    /// table's row order) into [`SourceTable::photometry`]; `bands` are the
    /// schema's band ids in order, with whether each has flux densities.
    ///
    /// # Errors
    /// [`Error::Format`] naming `origin` when a band's columns are missing.
    pub fn read_photometry(
        &mut self,
        batches: &[RecordBatch],
        bands: &[(String, bool)],
        origin: &std::path::Path,
    ) -> Result<()> {
        let n: usize = batches.iter().map(RecordBatch::num_rows).sum();
        let mut codes = vec![f64::NAN; n * bands.len()];
        let mut start = 0;
        for batch in batches {
            for (b, (id, has_flux)) in bands.iter().enumerate() {
                let status = batch
                    .column_by_name(&format!("{id}_status"))
                    .and_then(|c| arrow::compute::cast(c, &arrow::datatypes::DataType::Utf8).ok())
                    .ok_or_else(|| {
                        Error::format(origin, format!("normalized table lacks column {id}_status"))
                    })?;
                let status = status.as_string::<i32>();
                let number = |suffix: &str| -> Result<&arrow::array::PrimitiveArray<Float64Type>> {
                    batch
                        .column_by_name(&format!("{id}_{suffix}"))
                        .and_then(|c| c.as_primitive_opt::<Float64Type>())
                        .ok_or_else(|| {
                            Error::format(
                                origin,
                                format!(
                                    "normalized table lacks a Float64 column \"{id}_{suffix}\""
                                ),
                            )
                        })
                };
                let fluxes = if *has_flux {
                    Some((number("flux_jy")?, number("ulim_jy")?))
                } else {
                    None
                };
                for i in 0..batch.num_rows() {
                    let positive = |a: &arrow::array::PrimitiveArray<Float64Type>| {
                        (a.is_valid(i) && a.value(i) > 0.0 && a.value(i).is_finite())
                            .then(|| a.value(i))
                    };
                    let text = if status.is_valid(i) {
                        status.value(i)
                    } else {
                        ""
                    };
                    let value = match (text, fluxes) {
                        ("detected", Some((flux, _))) => {
                            positive(flux).map_or(BandValue::Measured, BandValue::Detected)
                        }
                        ("upper_limit", Some((_, ulim))) => {
                            positive(ulim).map_or(BandValue::None, BandValue::Limit)
                        }
                        ("detected" | "saturated", _) => BandValue::Measured,
                        _ => BandValue::None,
                    };
                    codes[(start + i) * bands.len() + b] = value.code();
                }
            }
            start += batch.num_rows();
        }
        self.photometry = codes;
        self.bands = bands.len();
        Ok(())
    }

    /// The value of source `i` in band `b` ([`BandValue::None`] when the
    /// photometry was not read).
    pub fn band_value(&self, i: usize, b: usize) -> BandValue {
        if b >= self.bands {
            return BandValue::None;
        }
        self.photometry
            .get(i * self.bands + b)
            .map_or(BandValue::None, |&c| BandValue::from_code(c))
    }

    /// Number of sources.
    pub fn len(&self) -> usize {
        self.ra_deg.len()
    }

    /// True when the table has no sources.
    pub fn is_empty(&self) -> bool {
        self.ra_deg.is_empty()
    }

    /// Whether source `i` was measured by forced photometry: such a source
    /// confirms an object found by others and should not found one alone.
    pub fn is_forced(&self, i: usize) -> bool {
        self.forced.get(i).copied().unwrap_or(false)
    }

    /// True when some source of the table was measured by forced photometry.
    pub fn has_forced(&self) -> bool {
        self.forced.iter().any(|f| *f)
    }

    /// Whether source `i` is extended: a galaxy, which is never taken as a
    /// moving object.
    pub fn is_extended(&self, i: usize) -> bool {
        self.extended.get(i).copied().unwrap_or(false)
    }

    /// The proper-motion errors of source `i`, mas/yr (NaN when unknown).
    pub fn pm_err(&self, i: usize) -> (f64, f64) {
        self.pm_err_masyr
            .get(i)
            .copied()
            .unwrap_or((f64::NAN, f64::NAN))
    }

    /// True when some source of the table is extended.
    pub fn has_extended(&self) -> bool {
        self.extended.iter().any(|f| *f)
    }

    /// Appends one source with a circular error and no proper motion (handy in tests).
    pub fn push_simple(
        &mut self,
        id: &str,
        ra_deg: f64,
        dec_deg: f64,
        epoch_yr: f64,
        sigma_arcsec: f64,
    ) {
        self.push(
            id,
            ra_deg,
            dec_deg,
            epoch_yr,
            (sigma_arcsec, sigma_arcsec, 0.0),
            None,
        );
    }

    /// Appends one source; `ellipse` is (major, minor, angle) in (arcsec, arcsec, deg)
    /// and `pm` is (mu_ra cos dec, mu_dec) in mas/yr.
    pub fn push(
        &mut self,
        id: &str,
        ra_deg: f64,
        dec_deg: f64,
        epoch_yr: f64,
        ellipse: (f64, f64, f64),
        pm: Option<(f64, f64)>,
    ) {
        self.source_id.push(id);
        self.ra_deg.push(ra_deg);
        self.dec_deg.push(dec_deg);
        self.epoch_yr.push(epoch_yr);
        self.err_major_arcsec.push(ellipse.0);
        self.err_minor_arcsec.push(ellipse.1);
        self.err_pa_deg.push(ellipse.2);
        let (a, d) = pm.unwrap_or((f64::NAN, f64::NAN));
        self.pmra_cosdec_masyr.push(a);
        self.pmdec_masyr.push(d);
    }

    /// Collects the matching columns of normalized source batches (as written by
    /// the normalizer) into a table named `name`.
    ///
    /// # Errors
    /// [`Error::Format`] naming `origin` when a column is missing or mistyped.
    pub fn from_batches(
        name: &str,
        batches: &[RecordBatch],
        origin: &std::path::Path,
    ) -> Result<SourceTable> {
        let mut t = SourceTable {
            name: name.to_string(),
            ..SourceTable::default()
        };
        for batch in batches {
            let f64s = |col: &str| -> Result<&arrow::array::PrimitiveArray<Float64Type>> {
                batch
                    .column_by_name(col)
                    .and_then(|c| c.as_primitive_opt::<Float64Type>())
                    .ok_or_else(|| {
                        Error::format(
                            origin,
                            format!("normalized table lacks a Float64 column \"{col}\""),
                        )
                    })
            };
            let ids = batch
                .column_by_name("source_id")
                .and_then(|c| c.as_string_opt::<i32>())
                .ok_or_else(|| {
                    Error::format(origin, "normalized table lacks a text column \"source_id\"")
                })?;
            for id in ids.iter() {
                t.source_id.push(id.unwrap_or_default());
            }
            let opt = |a: &arrow::array::PrimitiveArray<Float64Type>, out: &mut Vec<f64>| {
                out.extend((0..a.len()).map(|i| if a.is_null(i) { f64::NAN } else { a.value(i) }));
            };
            opt(f64s("ra_deg")?, &mut t.ra_deg);
            opt(f64s("dec_deg")?, &mut t.dec_deg);
            opt(f64s("epoch_yr")?, &mut t.epoch_yr);
            opt(f64s("pos_err_major_arcsec")?, &mut t.err_major_arcsec);
            opt(f64s("pos_err_minor_arcsec")?, &mut t.err_minor_arcsec);
            opt(f64s("pos_err_pa_deg")?, &mut t.err_pa_deg);
            opt(f64s("pmra_cosdec_masyr")?, &mut t.pmra_cosdec_masyr);
            opt(f64s("pmdec_masyr")?, &mut t.pmdec_masyr);
            let [era, edec] = crate::catalog::normalize::PM_ERROR_COLUMNS;
            if let (Some(_), Some(_)) = (batch.column_by_name(era), batch.column_by_name(edec)) {
                let (mut a, mut d) = (Vec::new(), Vec::new());
                opt(f64s(era)?, &mut a);
                opt(f64s(edec)?, &mut d);
                let before = t.ra_deg.len() - a.len();
                t.pm_err_masyr.resize(before, (f64::NAN, f64::NAN));
                t.pm_err_masyr.extend(a.into_iter().zip(d));
            }
            if let Some(ext) = batch.column_by_name(crate::catalog::normalize::EXTENDED_COLUMN) {
                let ext = ext.as_boolean_opt().ok_or_else(|| {
                    Error::format(
                        origin,
                        "normalized table's \"extended\" column is not Boolean",
                    )
                })?;
                t.extended.resize(t.ra_deg.len() - ext.len(), false);
                t.extended
                    .extend((0..ext.len()).map(|i| ext.is_valid(i) && ext.value(i)));
            }
            if let Some(forced) = batch.column_by_name(crate::catalog::normalize::FORCED_COLUMN) {
                let forced = forced.as_boolean_opt().ok_or_else(|| {
                    Error::format(
                        origin,
                        "normalized table's \"forced\" column is not Boolean",
                    )
                })?;
                // Rows of earlier batches without the column were not forced.
                t.forced.resize(t.ra_deg.len() - forced.len(), false);
                t.forced
                    .extend((0..forced.len()).map(|i| forced.is_valid(i) && forced.value(i)));
            }
        }
        if !t.forced.is_empty() {
            t.forced.resize(t.ra_deg.len(), false);
        }
        if !t.extended.is_empty() {
            t.extended.resize(t.ra_deg.len(), false);
        }
        if !t.pm_err_masyr.is_empty() {
            t.pm_err_masyr.resize(t.ra_deg.len(), (f64::NAN, f64::NAN));
        }
        Ok(t)
    }
}

/// The source identifiers of one catalog, in one text buffer: no allocation
/// per source, and `ids[i]` is the `&str` of source `i`.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct SourceIds {
    text: String,
    /// End of each identifier in `text`.
    ends: Vec<usize>,
}

impl SourceIds {
    /// Number of identifiers.
    pub fn len(&self) -> usize {
        self.ends.len()
    }

    /// True when there are none.
    pub fn is_empty(&self) -> bool {
        self.ends.is_empty()
    }

    /// Appends one identifier.
    pub fn push(&mut self, id: &str) {
        self.text.push_str(id);
        self.ends.push(self.text.len());
    }

    /// Identifier `i`.
    ///
    /// # Panics
    /// If `i` is out of range.
    pub fn get(&self, i: usize) -> &str {
        let start = if i == 0 { 0 } else { self.ends[i - 1] };
        &self.text[start..self.ends[i]]
    }

    /// The identifiers in order.
    pub fn iter(&self) -> impl ExactSizeIterator<Item = &str> + '_ {
        (0..self.len()).map(|i| self.get(i))
    }
}

impl std::ops::Index<usize> for SourceIds {
    type Output = str;

    fn index(&self, i: usize) -> &str {
        self.get(i)
    }
}

impl<S: AsRef<str>> FromIterator<S> for SourceIds {
    fn from_iter<I: IntoIterator<Item = S>>(iter: I) -> SourceIds {
        let mut ids = SourceIds::default();
        for id in iter {
            ids.push(id.as_ref());
        }
        ids
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn identifiers_come_back_as_pushed() {
        let ids: SourceIds = ["a1", "", "ß-7"].into_iter().collect();
        assert_eq!(ids.len(), 3);
        assert_eq!(&ids[0], "a1");
        assert_eq!(&ids[1], "");
        assert_eq!(&ids[2], "ß-7");
        assert_eq!(ids.iter().collect::<Vec<_>>(), ["a1", "", "ß-7"]);
    }
}
