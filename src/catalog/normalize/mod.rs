//! The normalizer: a survey's own columns in, a calibrated source table out.
//!
//! [`Normalizer`] applies a [`SurveySchema`] to the record batches of one
//! catalog file. Each output row is one source with
//!
//! - `catalog`, `source_id`, `row` (the data row in the file, from 1);
//! - `ra_deg`, `dec_deg`, `epoch_yr` (Julian years);
//! - `pos_err_major_arcsec`, `pos_err_minor_arcsec`, `pos_err_pa_deg`: the 1-sigma
//!   error ellipse (a circle has major = minor and angle 0);
//! - `pmra_cosdec_masyr`, `pmdec_masyr`: proper motion with the RA component
//!   always including cos(dec), null when the survey has none;
//! - per band with a zero point: `<band>_flux_jy`, `<band>_flux_err_jy`
//!   (first-order 1-sigma), `<band>_flux_lo_jy`, `<band>_flux_hi_jy` (the exact
//!   1-sigma interval, asymmetric for magnitudes), `<band>_ulim_jy` and
//!   `<band>_status`; per magnitude-only band: `<band>_mag`, `<band>_mag_err`,
//!   `<band>_ulim_mag`, `<band>_status`.
//!
//! Upper limits never share a column with detections: a limit row has a null
//! `flux_jy` and its limit in `ulim_jy` (with the noise `flux_err_jy` when known).
//!
//! The decision for each band measurement, in order:
//! 1. no value (null, empty, NaN, a null sentinel): `upper_limit` when a separate
//!    limit column has a value, else `missing`;
//! 2. a non-detection sentinel: `not_detected` (with the survey depth as the limit
//!    when the schema gives one);
//! 3. a quality rule matches: `rejected`, counted by rule;
//! 4. a limit flag, or a value without error under `missing_error`: `upper_limit`
//!    with the value as the limit;
//! 5. the value is converted; S/N below the schema's threshold: `upper_limit`
//!    by the schema's rule;
//! 6. a flux density that is zero or negative is never a detection: it becomes an
//!    upper limit max(F, 0) + 3 sigma when an error is known (common practice),
//!    else `rejected`;
//! 7. otherwise `detected`.
//!
//! An error value that is zero or negative is read as "no error" (catalogs use
//! such values as sentinels).

mod columns;
pub mod position;
mod report;

use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow::array::{
    ArrayRef, Float64Array, Float64Builder, RecordBatch, StringArray, StringBuilder, UInt64Builder,
};
use arrow::buffer::NullBuffer;
use arrow::datatypes::{DataType, Field, Schema, SchemaRef};
use rayon::prelude::*;

pub use columns::{NotANumber, NumberColumn, TextColumn};
pub use report::{BandCounts, BandStatus, NormalizeReport, Problem};

use super::schema::{
    AngleUnit, BandColumns, Epoch, EpochUnit, LimitMarker, PositionError, PositionFormat,
    QualityRule, SurveySchema,
};
use crate::error::{Error, Result};
use crate::photometry::{Conversion, FluxJy, LimitRule};

/// Limit rule for a non-positive flux density in a survey with no rule of its own:
/// max(F, 0) + 3 sigma (common practice).
pub const DEFAULT_NONPOSITIVE_RULE: LimitRule = LimitRule::FluxPlusSigma { n: 3.0 };

/// How strictly bad input is treated.
#[derive(Debug, Clone, Copy, Default)]
pub struct NormalizeOptions {
    /// Skip rows whose identifier, position, epoch or position error cannot be read
    /// (counted by reason) and mark unreadable band values as rejected, instead of
    /// stopping at the first such value.
    pub skip_bad_rows: bool,
}

/// Applies a survey schema to a catalog file's batches, one batch at a time.
pub struct Normalizer {
    schema: SurveySchema,
    path: PathBuf,
    options: NormalizeOptions,
    output: SchemaRef,
    report: NormalizeReport,
    rows_seen: u64,
}

/// A row-level problem: the column, what was expected, what was found.
struct RowProblem {
    column: String,
    expected: String,
    found: String,
}

impl RowProblem {
    fn new(column: &str, expected: &str, found: impl Into<String>) -> RowProblem {
        RowProblem {
            column: column.to_string(),
            expected: expected.to_string(),
            found: found.into(),
        }
    }
}

impl Normalizer {
    /// A normalizer for the catalog at `path` described by `schema`.
    pub fn new(schema: &SurveySchema, path: &Path, options: NormalizeOptions) -> Normalizer {
        let mut normalizer = Normalizer {
            output: output_schema(schema),
            schema: schema.clone(),
            path: path.to_path_buf(),
            options,
            report: NormalizeReport::default(),
            rows_seen: 0,
        };
        normalizer.report = normalizer.empty_report();
        normalizer
    }

    /// The Arrow schema of the normalized batches.
    pub fn output_schema(&self) -> SchemaRef {
        self.output.clone()
    }

    /// The counts so far.
    pub fn report(&self) -> &NormalizeReport {
        &self.report
    }

    /// Ends the run and returns its counts.
    pub fn finish(self) -> NormalizeReport {
        self.report
    }

    /// Checks that every column the schema names exists in the file and has a
    /// usable type.
    ///
    /// # Errors
    /// [`Error::MissingColumn`] naming the schema line, or [`Error::ColumnType`].
    pub fn check_file(&self, file: &Schema) -> Result<()> {
        let available = || {
            file.fields()
                .iter()
                .map(|f| f.name().as_str())
                .collect::<Vec<_>>()
                .join(", ")
        };
        for (column, line) in self.schema.referenced_columns() {
            let Ok(field) = file.field_with_name(&column) else {
                let line = self.schema.line_of_column(&column, line);
                return Err(Error::MissingColumn {
                    path: self.path.clone(),
                    column,
                    named_at: format!("named at {}:{line}", self.schema.path.display()),
                    available: available(),
                });
            };
            crate::catalog::check_unique_column(&self.path, file, &column)?;
            let t = field.data_type();
            let usable = t.is_numeric()
                || matches!(
                    t,
                    DataType::Utf8
                        | DataType::LargeUtf8
                        | DataType::Utf8View
                        | DataType::Boolean
                        | DataType::Null
                );
            if !usable {
                return Err(Error::ColumnType {
                    path: self.path.clone(),
                    column,
                    expected: "numbers or text".into(),
                    found: t.to_string(),
                });
            }
        }
        Ok(())
    }

    /// Normalizes one batch of the file (batches must come in file order).
    ///
    /// # Errors
    /// Without skipping, the first unreadable value as [`Error::BadValue`] naming
    /// its row and column; a missing column as [`Error::MissingColumn`].
    pub fn normalize(&mut self, batch: &RecordBatch) -> Result<RecordBatch> {
        let first_row = self.rows_seen + 1;
        self.rows_seen += batch.num_rows() as u64;
        let (out, part) = self.normalize_at(batch, first_row)?;
        self.report.absorb(part);
        Ok(out)
    }

    /// Normalizes several consecutive batches of the file at once, in parallel;
    /// the result and the counts are the same as one [`Normalizer::normalize`] call
    /// per batch, in order.
    ///
    /// # Errors
    /// As [`Normalizer::normalize`]; the error of the earliest failing batch.
    pub fn normalize_many(&mut self, batches: &[RecordBatch]) -> Result<Vec<RecordBatch>> {
        let mut first_rows = Vec::with_capacity(batches.len());
        for b in batches {
            first_rows.push(self.rows_seen + 1);
            self.rows_seen += b.num_rows() as u64;
        }
        let parts: Vec<Result<(RecordBatch, NormalizeReport)>> = batches
            .par_iter()
            .zip(first_rows)
            .map(|(b, first)| self.normalize_at(b, first))
            .collect();
        let mut out = Vec::with_capacity(parts.len());
        for part in parts {
            let (batch, report) = part?;
            self.report.absorb(report);
            out.push(batch);
        }
        Ok(out)
    }

    /// Normalizes one batch whose first row is data row `first_row` of the file,
    /// returning the batch and its own counts.
    fn normalize_at(
        &self,
        batch: &RecordBatch,
        first_row: u64,
    ) -> Result<(RecordBatch, NormalizeReport)> {
        let n = batch.num_rows();
        let mut report = self.empty_report();
        report.rows_read = n as u64;
        let inputs = RowInputs::new(&self.schema, batch, &self.path)?;
        let bands: Vec<BandInput> = self
            .schema
            .bands
            .iter()
            .map(|spec| BandInput::new(spec, batch, &self.path))
            .collect::<Result<_>>()?;
        let skip = self.options.skip_bad_rows;
        let bad_value = |i: usize, p: RowProblem| Error::BadValue {
            path: self.path.clone(),
            row: first_row + i as u64,
            column: p.column,
            expected: p.expected,
            found: p.found,
        };
        let mut problems: Vec<Problem> = Vec::new();

        // Row-level fields first; in strict mode stop at the first bad row, but
        // report a band problem of an earlier row if there is one (below).
        let mut out = RowBuilders::new(n, &self.schema.survey);
        let mut kept: Vec<u32> = Vec::with_capacity(n);
        let mut row_error: Option<(usize, RowProblem)> = None;
        for i in 0..n {
            match inputs.read(i, &self.schema) {
                Ok(fields) => {
                    out.append(first_row + i as u64, &fields);
                    kept.push(i as u32);
                }
                Err(p) if skip => {
                    let reason = format!("column \"{}\": expected {}", p.column, p.expected);
                    *report.rows_skipped.entry(reason).or_insert(0) += 1;
                    problems.push(Problem {
                        row: first_row + i as u64,
                        column: p.column,
                        expected: p.expected,
                        found: p.found,
                        action: "row skipped".into(),
                    });
                }
                Err(p) => {
                    row_error = Some((i, p));
                    break;
                }
            }
        }

        // Then each band over the kept rows, one column at a time.
        let mut columns = out.finish();
        let mut band_error: Option<(usize, RowProblem)> = None;
        for (band, counts) in bands.iter().zip(report.bands.iter_mut()) {
            let mut cols = BandOutput::new(kept.len(), band.spec.has_flux());
            for (k, &i) in kept.iter().enumerate() {
                let i = i as usize;
                let outcome = match band.evaluate(i) {
                    Ok(o) => o,
                    Err(p) if skip => {
                        let reason = format!("unreadable value in column \"{}\"", p.column);
                        problems.push(Problem {
                            row: first_row + i as u64,
                            column: p.column,
                            expected: p.expected,
                            found: p.found,
                            action: "band rejected".into(),
                        });
                        Outcome::Rejected(reason)
                    }
                    Err(p) => {
                        if band_error.as_ref().is_none_or(|(row, _)| i < *row) {
                            band_error = Some((i, p));
                        }
                        break;
                    }
                };
                let status = cols.set(k, outcome, counts);
                counts.add(status);
            }
            columns.extend(cols.finish());
        }
        match (band_error, row_error) {
            (Some((i, p)), _) | (None, Some((i, p))) => return Err(bad_value(i, p)),
            (None, None) => {}
        }
        problems.sort_by_key(|p| p.row);
        for p in problems {
            report.record_problem(p);
        }
        report.rows_kept = kept.len() as u64;
        let out = RecordBatch::try_new(self.output.clone(), columns)
            .map_err(|e| Error::columnar(&self.path, e))?;
        Ok((out, report))
    }

    fn empty_report(&self) -> NormalizeReport {
        NormalizeReport {
            survey: self.schema.survey.clone(),
            bands: self
                .schema
                .bands
                .iter()
                .map(|b| BandCounts {
                    band: b.band.id.clone(),
                    ..BandCounts::default()
                })
                .collect(),
            ..NormalizeReport::default()
        }
    }
}

/// The Arrow schema of normalized tables for `schema`, with units in field metadata.
pub fn output_schema(schema: &SurveySchema) -> SchemaRef {
    let mut fields = vec![
        Field::new("catalog", DataType::Utf8, false),
        Field::new("source_id", DataType::Utf8, false),
        Field::new("row", DataType::UInt64, false),
        with_unit(Field::new("ra_deg", DataType::Float64, false), "deg"),
        with_unit(Field::new("dec_deg", DataType::Float64, false), "deg"),
        with_unit(Field::new("epoch_yr", DataType::Float64, false), "yr"),
        with_unit(
            Field::new("pos_err_major_arcsec", DataType::Float64, false),
            "arcsec",
        ),
        with_unit(
            Field::new("pos_err_minor_arcsec", DataType::Float64, false),
            "arcsec",
        ),
        with_unit(
            Field::new("pos_err_pa_deg", DataType::Float64, false),
            "deg",
        ),
        with_unit(
            Field::new("pmra_cosdec_masyr", DataType::Float64, true),
            "mas/yr",
        ),
        with_unit(Field::new("pmdec_masyr", DataType::Float64, true), "mas/yr"),
    ];
    for band in &schema.bands {
        let id = &band.band.id;
        if band.has_flux() {
            for suffix in [
                "flux_jy",
                "flux_err_jy",
                "flux_lo_jy",
                "flux_hi_jy",
                "ulim_jy",
            ] {
                fields.push(with_unit(
                    Field::new(format!("{id}_{suffix}"), DataType::Float64, true),
                    "Jy",
                ));
            }
        } else {
            for suffix in ["mag", "mag_err", "ulim_mag"] {
                fields.push(with_unit(
                    Field::new(format!("{id}_{suffix}"), DataType::Float64, true),
                    "mag",
                ));
            }
        }
        fields.push(Field::new(format!("{id}_status"), status_type(), false));
    }
    Arc::new(Schema::new(fields))
}

/// The type of status columns: text, dictionary-encoded (one byte per row).
pub fn status_type() -> DataType {
    DataType::Dictionary(Box::new(DataType::Int8), Box::new(DataType::Utf8))
}

/// A status column from status codes (indices into `names`).
pub fn status_column(codes: Vec<i8>, names: &[&str]) -> ArrayRef {
    let keys = arrow::array::Int8Array::from(codes);
    let values: ArrayRef = Arc::new(StringArray::from(names.to_vec()));
    Arc::new(
        arrow::array::DictionaryArray::<arrow::datatypes::Int8Type>::try_new(keys, values)
            .expect("status codes index the status names"),
    )
}

fn with_unit(field: Field, unit: &str) -> Field {
    field.with_metadata(std::collections::HashMap::from([(
        "unit".to_string(),
        unit.to_string(),
    )]))
}

// ---------------------------------------------------------------------------
// Row-level fields: identifier, position, epoch, position error, proper motion.

struct RowFields<'a> {
    id: Option<&'a str>,
    ra_deg: f64,
    dec_deg: f64,
    epoch_yr: f64,
    ellipse: (f64, f64, f64),
    pm: Option<(f64, f64)>,
}

enum Coordinates {
    Degrees(NumberColumn, NumberColumn),
    Sexagesimal(TextColumn, TextColumn),
}

struct RowInputs {
    id: Option<TextColumn>,
    coordinates: Coordinates,
    errors: Vec<NumberColumn>,
    epoch: Option<NumberColumn>,
    pm: Option<(NumberColumn, NumberColumn)>,
}

fn column<'b>(batch: &'b RecordBatch, name: &str, path: &Path) -> Result<&'b ArrayRef> {
    batch
        .column_by_name(name)
        .ok_or_else(|| Error::MissingColumn {
            path: path.to_path_buf(),
            column: name.to_string(),
            named_at: "named in the survey schema".into(),
            available: batch
                .schema()
                .fields()
                .iter()
                .map(|f| f.name().as_str())
                .collect::<Vec<_>>()
                .join(", "),
        })
}

fn numbers(batch: &RecordBatch, name: &str, path: &Path) -> Result<NumberColumn> {
    let array = column(batch, name, path)?;
    NumberColumn::new(array).ok_or_else(|| Error::ColumnType {
        path: path.to_path_buf(),
        column: name.to_string(),
        expected: "numbers (or text holding numbers)".into(),
        found: array.data_type().to_string(),
    })
}

fn text(batch: &RecordBatch, name: &str, path: &Path) -> Result<TextColumn> {
    let array = column(batch, name, path)?;
    TextColumn::new(array).ok_or_else(|| Error::ColumnType {
        path: path.to_path_buf(),
        column: name.to_string(),
        expected: "text, numbers or booleans".into(),
        found: array.data_type().to_string(),
    })
}

impl RowInputs {
    fn new(schema: &SurveySchema, batch: &RecordBatch, path: &Path) -> Result<RowInputs> {
        let id = schema
            .id
            .as_ref()
            .map(|c| text(batch, c, path))
            .transpose()?;
        let coordinates = match schema.position_format {
            PositionFormat::Degrees => Coordinates::Degrees(
                numbers(batch, &schema.ra, path)?,
                numbers(batch, &schema.dec, path)?,
            ),
            PositionFormat::Sexagesimal => Coordinates::Sexagesimal(
                text(batch, &schema.ra, path)?,
                text(batch, &schema.dec, path)?,
            ),
        };
        let errors = match &schema.position_error {
            PositionError::Fixed { .. } => vec![],
            PositionError::Circular { column, .. } => vec![numbers(batch, column, path)?],
            PositionError::Ellipse {
                major,
                minor,
                angle,
                ..
            } => vec![
                numbers(batch, major, path)?,
                numbers(batch, minor, path)?,
                numbers(batch, angle, path)?,
            ],
            PositionError::Axes { ra, dec, .. } => {
                vec![numbers(batch, ra, path)?, numbers(batch, dec, path)?]
            }
        };
        let epoch = match &schema.epoch {
            Epoch::Fixed(_) => None,
            Epoch::Column { column, .. } => Some(numbers(batch, column, path)?),
        };
        let pm = match &schema.proper_motion {
            None => None,
            Some(pm) => Some((
                numbers(batch, &pm.ra, path)?,
                numbers(batch, &pm.dec, path)?,
            )),
        };
        Ok(RowInputs {
            id,
            coordinates,
            errors,
            epoch,
            pm,
        })
    }

    fn read(&self, i: usize, schema: &SurveySchema) -> Result<RowFields<'_>, RowProblem> {
        let id = match (&self.id, &schema.id) {
            (Some(col), Some(name)) => match col.get(i) {
                Some(s) if !s.is_empty() => Some(s),
                _ => return Err(RowProblem::new(name, "a source identifier", "")),
            },
            _ => None,
        };
        let (ra_deg, dec_deg) = match &self.coordinates {
            Coordinates::Degrees(ra, dec) => {
                let ra_deg = required(ra, i, &schema.ra, "RA in degrees")?;
                let dec_deg = required(dec, i, &schema.dec, "Dec in degrees")?;
                if !(0.0..=360.0).contains(&ra_deg) {
                    return Err(RowProblem::new(
                        &schema.ra,
                        "RA in degrees within [0, 360]",
                        ra_deg.to_string(),
                    ));
                }
                if !(-90.0..=90.0).contains(&dec_deg) {
                    return Err(RowProblem::new(
                        &schema.dec,
                        "Dec in degrees within [-90, 90]",
                        dec_deg.to_string(),
                    ));
                }
                (if ra_deg == 360.0 { 0.0 } else { ra_deg }, dec_deg)
            }
            Coordinates::Sexagesimal(ra, dec) => {
                let ra_text = ra.get(i).unwrap_or("");
                let dec_text = dec.get(i).unwrap_or("");
                let ra_deg = position::parse_ra_hours(ra_text).ok_or_else(|| {
                    RowProblem::new(&schema.ra, "RA as hh:mm:ss.s (0h to 24h)", ra_text)
                })?;
                let dec_deg = position::parse_dec_degrees(dec_text).ok_or_else(|| {
                    RowProblem::new(&schema.dec, "Dec as ±dd:mm:ss.s (-90 to +90)", dec_text)
                })?;
                (ra_deg, dec_deg)
            }
        };
        let epoch_yr = match (&schema.epoch, &self.epoch) {
            (Epoch::Fixed(y), _) => *y,
            (Epoch::Column { column, unit }, Some(col)) => {
                let v = required(col, i, column, "an epoch")?;
                match unit {
                    EpochUnit::Year => v,
                    EpochUnit::Mjd => position::mjd_to_julian_year(v),
                    EpochUnit::Jd => position::jd_to_julian_year(v),
                }
            }
            (Epoch::Column { .. }, None) => unreachable!("epoch column resolved in RowInputs::new"),
        };
        let positive =
            |col: &NumberColumn, name: &str, unit: AngleUnit| -> Result<f64, RowProblem> {
                let v = required(col, i, name, "a positive positional error")?;
                if v > 0.0 {
                    Ok(v * unit.to_arcsec())
                } else {
                    Err(RowProblem::new(
                        name,
                        "a positive positional error",
                        v.to_string(),
                    ))
                }
            };
        let ellipse = match &schema.position_error {
            PositionError::Fixed { sigma_arcsec } => (*sigma_arcsec, *sigma_arcsec, 0.0),
            PositionError::Circular { column, unit } => {
                let s = positive(&self.errors[0], column, *unit)?;
                (s, s, 0.0)
            }
            PositionError::Ellipse {
                major,
                minor,
                angle,
                unit,
            } => {
                let a = positive(&self.errors[0], major, *unit)?;
                let b = positive(&self.errors[1], minor, *unit)?;
                let pa = required(&self.errors[2], i, angle, "a position angle in degrees")?;
                if a >= b {
                    (a, b, pa.rem_euclid(180.0))
                } else {
                    (b, a, (pa + 90.0).rem_euclid(180.0))
                }
            }
            PositionError::Axes { ra, dec, unit } => {
                let sra = positive(&self.errors[0], ra, *unit)?;
                let sdec = positive(&self.errors[1], dec, *unit)?;
                position::axes_to_ellipse(sra, sdec)
            }
        };
        let pm = match (&self.pm, &schema.proper_motion) {
            (Some((pmra, pmdec)), Some(spec)) => {
                let a = pmra
                    .get(i, &[], &[])
                    .map_err(|e| RowProblem::new(&spec.ra, "a proper motion in mas/yr", e.found))?;
                let d = pmdec.get(i, &[], &[]).map_err(|e| {
                    RowProblem::new(&spec.dec, "a proper motion in mas/yr", e.found)
                })?;
                match (a, d) {
                    (Some(a), Some(d)) => {
                        let a = if spec.ra_includes_cos_dec {
                            a
                        } else {
                            a * dec_deg.to_radians().cos()
                        };
                        Some((a, d))
                    }
                    _ => None,
                }
            }
            _ => None,
        };
        Ok(RowFields {
            id,
            ra_deg,
            dec_deg,
            epoch_yr,
            ellipse,
            pm,
        })
    }
}

fn required(col: &NumberColumn, i: usize, name: &str, expected: &str) -> Result<f64, RowProblem> {
    match col.get(i, &[], &[]) {
        Ok(Some(v)) => Ok(v),
        Ok(None) => Err(RowProblem::new(name, expected, "")),
        Err(e) => Err(RowProblem::new(name, expected, e.found)),
    }
}

struct RowBuilders {
    survey: String,
    source_id: StringBuilder,
    row: UInt64Builder,
    values: [Float64Builder; 6],
    pmra: Float64Builder,
    pmdec: Float64Builder,
}

impl RowBuilders {
    fn new(n: usize, survey: &str) -> RowBuilders {
        RowBuilders {
            survey: survey.to_string(),
            source_id: StringBuilder::with_capacity(n, n * 8),
            row: UInt64Builder::with_capacity(n),
            values: std::array::from_fn(|_| Float64Builder::with_capacity(n)),
            pmra: Float64Builder::with_capacity(n),
            pmdec: Float64Builder::with_capacity(n),
        }
    }

    fn append(&mut self, row: u64, f: &RowFields) {
        match f.id {
            Some(id) => self.source_id.append_value(id),
            None => self.source_id.append_value(row.to_string()),
        }
        self.row.append_value(row);
        let v = [
            f.ra_deg,
            f.dec_deg,
            f.epoch_yr,
            f.ellipse.0,
            f.ellipse.1,
            f.ellipse.2,
        ];
        for (b, x) in self.values.iter_mut().zip(v) {
            b.append_value(x);
        }
        self.pmra.append_option(f.pm.map(|p| p.0));
        self.pmdec.append_option(f.pm.map(|p| p.1));
    }

    fn finish(mut self) -> Vec<ArrayRef> {
        let n = arrow::array::ArrayBuilder::len(&self.row);
        let catalog = arrow::array::StringArray::from_iter_values(std::iter::repeat_n(
            self.survey.as_str(),
            n,
        ));
        let mut cols: Vec<ArrayRef> = vec![
            Arc::new(catalog),
            Arc::new(self.source_id.finish()),
            Arc::new(self.row.finish()),
        ];
        for b in self.values.iter_mut() {
            cols.push(Arc::new(b.finish()));
        }
        cols.push(Arc::new(self.pmra.finish()));
        cols.push(Arc::new(self.pmdec.finish()));
        cols
    }
}

// ---------------------------------------------------------------------------
// Band measurements.

/// What a band measurement turned out to be, in output units.
enum Outcome {
    Detected(FluxJy),
    /// Limit, and the noise (1 sigma) when known.
    UpperLimit(f64, Option<f64>),
    NotDetected(Option<f64>),
    Missing,
    Rejected(String),
}

enum QualityInput {
    Reject(TextColumn),
    Range(NumberColumn),
}

struct BandInput<'a> {
    spec: &'a BandColumns,
    conversion: Option<Conversion>,
    value: NumberColumn,
    error: Option<NumberColumn>,
    flag: Option<TextColumn>,
    limit_column: Option<NumberColumn>,
    quality: Vec<QualityInput>,
}

impl<'a> BandInput<'a> {
    fn new(spec: &'a BandColumns, batch: &RecordBatch, path: &Path) -> Result<BandInput<'a>> {
        let conversion = spec.conversion();
        let flag = match &spec.limit {
            Some(LimitMarker::Flag { column, .. }) => Some(text(batch, column, path)?),
            _ => None,
        };
        let limit_column = match &spec.limit {
            Some(LimitMarker::Column { column }) => Some(numbers(batch, column, path)?),
            _ => None,
        };
        let quality = spec
            .quality
            .iter()
            .map(|q| match q {
                QualityRule::Reject { column, .. } => {
                    Ok(QualityInput::Reject(text(batch, column, path)?))
                }
                QualityRule::Range { column, .. } => {
                    Ok(QualityInput::Range(numbers(batch, column, path)?))
                }
            })
            .collect::<Result<_>>()?;
        Ok(BandInput {
            spec,
            conversion,
            value: numbers(batch, &spec.value, path)?,
            error: spec
                .error
                .as_ref()
                .map(|c| numbers(batch, c, path))
                .transpose()?,
            flag,
            limit_column,
            quality,
        })
    }

    /// The outcome of row `i`; a value whose conversion overflows (a magnitude of
    /// -1000 gives an infinite flux density) is unreadable like text in a
    /// number column.
    fn evaluate(&self, i: usize) -> Result<Outcome, RowProblem> {
        let outcome = self.classify(i)?;
        let finite = |v: Option<f64>| v.is_none_or(f64::is_finite);
        let (value_ok, error_ok) = match &outcome {
            Outcome::Detected(f) => (
                f.flux_jy.is_finite(),
                finite(f.err_jy) && finite(f.lo_jy) && finite(f.hi_jy),
            ),
            Outcome::UpperLimit(limit, noise) => (limit.is_finite(), finite(*noise)),
            Outcome::NotDetected(limit) => (finite(*limit), true),
            Outcome::Missing | Outcome::Rejected(_) => (true, true),
        };
        if value_ok && error_ok {
            return Ok(outcome);
        }
        let spec = self.spec;
        let (column, input) = match (&spec.error, &self.error) {
            (Some(name), Some(col)) if value_ok => (name.as_str(), col),
            _ => match (&spec.limit, &self.limit_column) {
                (Some(LimitMarker::Column { column }), Some(col))
                    if self
                        .value
                        .get(i, &spec.null_text, &spec.nulls)
                        .ok()
                        .flatten()
                        .is_none() =>
                {
                    (column.as_str(), col)
                }
                _ => (spec.value.as_str(), &self.value),
            },
        };
        let found = match input.get(i, &spec.null_text, &spec.nulls) {
            Ok(Some(v)) => v.to_string(),
            _ => String::new(),
        };
        Err(RowProblem::new(
            column,
            &format!(
                "a value in unit {} that converts to a finite flux density",
                spec.unit.as_str()
            ),
            found,
        ))
    }

    fn classify(&self, i: usize) -> Result<Outcome, RowProblem> {
        let spec = self.spec;
        let unreadable = |column: &str, e: NotANumber| {
            RowProblem::new(
                column,
                &format!("a number in unit {}", spec.unit.as_str()),
                e.found,
            )
        };
        let value = self
            .value
            .get(i, &spec.null_text, &spec.nulls)
            .map_err(|e| unreadable(&spec.value, e))?;
        let Some(value) = value else {
            if let (Some(LimitMarker::Column { column }), Some(col)) =
                (&spec.limit, &self.limit_column)
                && let Some(limit) = col
                    .get(i, &spec.null_text, &spec.nulls)
                    .map_err(|e| unreadable(column, e))?
            {
                return Ok(Outcome::UpperLimit(spec.to_output(limit), None));
            }
            return Ok(Outcome::Missing);
        };
        if let Some(LimitMarker::Sentinel { values }) = &spec.limit
            && values.contains(&value)
        {
            return Ok(Outcome::NotDetected(spec.depth.map(|d| spec.to_output(d))));
        }
        for (rule, input) in spec.quality.iter().zip(&self.quality) {
            let rejects = match (rule, input) {
                (
                    QualityRule::Reject {
                        values,
                        char_position,
                        ..
                    },
                    QualityInput::Reject(col),
                ) => col.matches(i, values, *char_position),
                (QualityRule::Range { column, min, max }, QualityInput::Range(col)) => {
                    match col.get(i, &[], &[]).map_err(|e| unreadable(column, e))? {
                        Some(v) => min.is_some_and(|m| v < m) || max.is_some_and(|m| v > m),
                        None => false,
                    }
                }
                _ => unreachable!("quality inputs are built in rule order"),
            };
            if rejects {
                return Ok(Outcome::Rejected(rule.describe()));
            }
        }
        let error = match (&self.error, &spec.error) {
            (Some(col), Some(name)) => col
                .get(i, &spec.null_text, &spec.nulls)
                .map_err(|e| unreadable(name, e))?
                .filter(|e| *e > 0.0),
            _ => None,
        };
        if let (
            Some(LimitMarker::Flag {
                values,
                char_position,
                ..
            }),
            Some(flag),
        ) = (&spec.limit, &self.flag)
            && flag.matches(i, values, *char_position)
        {
            return Ok(Outcome::UpperLimit(spec.to_output(value), None));
        }
        if matches!(spec.limit, Some(LimitMarker::MissingError)) && error.is_none() {
            return Ok(Outcome::UpperLimit(spec.to_output(value), None));
        }
        let Some(conversion) = &self.conversion else {
            // Magnitude-only band: kept as magnitudes.
            return Ok(Outcome::Detected(FluxJy {
                flux_jy: value + spec.offset_mag,
                err_jy: error,
                lo_jy: None,
                hi_jy: None,
            }));
        };
        let flux = conversion.to_flux_jy(value, error);
        if let (Some(LimitMarker::SignalToNoise { below, rule }), Some(sigma)) =
            (&spec.limit, flux.err_jy)
            && flux.flux_jy / sigma < *below
        {
            return Ok(Outcome::UpperLimit(
                rule.limit_jy(flux.flux_jy, sigma),
                Some(sigma),
            ));
        }
        if flux.flux_jy <= 0.0 {
            return Ok(match flux.err_jy {
                Some(sigma) => Outcome::UpperLimit(
                    DEFAULT_NONPOSITIVE_RULE.limit_jy(flux.flux_jy, sigma),
                    Some(sigma),
                ),
                None => Outcome::Rejected("flux density <= 0 without an error".into()),
            });
        }
        Ok(Outcome::Detected(flux))
    }
}

/// Output columns of one band, written by row index into preallocated
/// columns; status codes become text at the end.
struct BandOutput {
    has_flux: bool,
    values: Vec<Vec<f64>>,
    valid: Vec<Vec<bool>>,
    status: Vec<u8>,
}

impl BandOutput {
    fn new(n: usize, has_flux: bool) -> BandOutput {
        let count = if has_flux { 5 } else { 3 };
        BandOutput {
            has_flux,
            values: (0..count).map(|_| vec![0.0; n]).collect(),
            valid: (0..count).map(|_| vec![false; n]).collect(),
            status: vec![0; n],
        }
    }

    #[inline]
    fn put(&mut self, column: usize, k: usize, value: Option<f64>) {
        if let Some(v) = value {
            self.values[column][k] = v;
            self.valid[column][k] = true;
        }
    }

    /// Writes one measurement at row `k`; returns its status.
    #[inline]
    fn set(&mut self, k: usize, outcome: Outcome, counts: &mut BandCounts) -> BandStatus {
        // Flux bands: flux, err, lo, hi, ulim. Magnitude bands: mag, err, ulim.
        let ulim = self.values.len() - 1;
        let status = match outcome {
            Outcome::Detected(f) => {
                self.put(0, k, Some(f.flux_jy));
                self.put(1, k, f.err_jy);
                if self.has_flux {
                    self.put(2, k, f.lo_jy);
                    self.put(3, k, f.hi_jy);
                }
                BandStatus::Detected
            }
            Outcome::UpperLimit(limit, noise) => {
                self.put(1, k, noise);
                self.put(ulim, k, Some(limit));
                BandStatus::UpperLimit
            }
            Outcome::NotDetected(limit) => {
                self.put(ulim, k, limit);
                BandStatus::NotDetected
            }
            Outcome::Missing => BandStatus::Missing,
            Outcome::Rejected(reason) => {
                *counts.rejected_by.entry(reason).or_insert(0) += 1;
                BandStatus::Rejected
            }
        };
        self.status[k] = status as u8;
        status
    }

    fn finish(self) -> Vec<ArrayRef> {
        let mut cols: Vec<ArrayRef> = self
            .values
            .into_iter()
            .zip(self.valid)
            .map(|(values, valid)| {
                Arc::new(Float64Array::new(
                    values.into(),
                    Some(NullBuffer::from(valid)),
                )) as ArrayRef
            })
            .collect();
        let names: Vec<&str> = BandStatus::ALL.iter().map(|s| s.as_str()).collect();
        cols.push(status_column(
            self.status.into_iter().map(|s| s as i8).collect(),
            &names,
        ));
        cols
    }
}
