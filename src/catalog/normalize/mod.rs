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
//! 1. no value (null, empty, NaN, a null sentinel): `saturated` when the band's
//!    saturation test marks the row; `upper_limit` when a separate limit column
//!    has a value; `not_detected` under `empty = "not_detected"` where the band
//!    covers; else `missing`;
//! 2. a non-detection sentinel: `not_detected` (with the survey depth as the limit
//!    when the schema gives one);
//! 3. the saturation test: `saturated`, the value kept in `<band>_sat_jy`
//!    (`<band>_sat_mag`) only, never as a detection or a limit;
//! 4. a quality rule matches: `rejected`, counted by rule;
//! 5. a limit flag (text or bits), or a value without error under `missing_error`
//!    or `no_error = "limit"`: `upper_limit` with the value as the limit, except
//!    that a flux density ≤ 0 becomes max(F, 0) + 3σ (or the limit's own rule)
//!    when σ is known and is `rejected` otherwise;
//! 6. the value is converted; a forced row (`[forced]`) with S/N below its
//!    threshold: `upper_limit` max(F, 0) + nσ; S/N below the band's threshold:
//!    `upper_limit` by the schema's rule (S/N from the `snr` column when given,
//!    else F/σ);
//! 7. a flux density that is zero or negative is never a detection: it becomes an
//!    upper limit max(F, 0) + 3 sigma when an error is known (common practice),
//!    else `rejected`;
//! 8. otherwise `detected`.
//!
//! Without an error column, errors come from the `snr` column when the schema
//! names one (σ_m = 1.085736 / SNR, σ = |F| / |SNR|). Rows of a `[forced]`
//! schema carry a Boolean `forced` column. The position error may come from a
//! band's S/N (kind `snr`) and grows for extended sources (`[position] extended`);
//! rows given that size term are marked in a Boolean `extended` column.
//!
//! An error value that is zero or negative is read as "no error" (catalogs use
//! such values as sentinels).

mod columns;
pub mod position;
mod report;

use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow::array::{
    ArrayRef, BooleanBuilder, Float64Array, Float64Builder, RecordBatch, StringArray,
    StringBuilder, UInt64Builder,
};
use arrow::buffer::NullBuffer;
use arrow::datatypes::{DataType, Field, Schema, SchemaRef};
use rayon::prelude::*;

pub use columns::{BitsColumn, NotANumber, NumberColumn, TextColumn};
pub use report::{BandCounts, BandStatus, NormalizeReport, Problem};

use super::schema::{
    AngleUnit, BandColumns, Epoch, EpochUnit, Extended, FlagTest, LimitMarker, NoErrorPolicy,
    PositionError, PositionFormat, QualityRule, SurveySchema,
};
use crate::crossmatch::position_error::{add_extent_arcsec, centroid_sigma_arcsec};
use crate::error::{Error, Result};
use crate::photometry::{Conversion, FluxJy, LimitRule};

/// 2.5 / ln 10 = 1.0857362: σ_m = this / SNR to first order (FIELD notes §1.4;
/// Pogson 1856 relation, arithmetic).
pub const MAG_ERR_PER_INVERSE_SNR: f64 = 2.5 / std::f64::consts::LN_10;

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
            .map(|spec| BandInput::new(spec, &self.schema, batch, &self.path))
            .collect::<Result<_>>()?;
        for (column, longest) in report.flag_longest.iter_mut() {
            *longest = text(batch, column, &self.path)?
                .longest()
                .map(|(n, t)| (n, t.to_string()));
        }
        let position_band = match &self.schema.position_error {
            PositionError::SignalToNoise { band, .. } => {
                bands.iter().find(|b| &b.spec.band.id == band)
            }
            _ => None,
        };
        let snr_of = |i: usize| position_band.and_then(|b| b.snr_at(i));
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
        let mut out = RowBuilders::new(n, &self.schema);
        let mut kept: Vec<u32> = Vec::with_capacity(n);
        let mut contexts: Vec<RowContext> = Vec::with_capacity(n);
        let mut row_error: Option<(usize, RowProblem)> = None;
        for i in 0..n {
            match inputs.read(i, &self.schema, &snr_of) {
                Ok(fields) => {
                    out.append(first_row + i as u64, &fields);
                    kept.push(i as u32);
                    contexts.push(RowContext {
                        ra_deg: fields.ra_deg,
                        dec_deg: fields.dec_deg,
                        forced: fields.forced,
                    });
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
            let mut cols = BandOutput::new(
                kept.len(),
                band.spec.has_flux(),
                band.spec.saturated.is_some(),
            );
            for (k, &i) in kept.iter().enumerate() {
                let i = i as usize;
                let outcome = match band.evaluate(i, &contexts[k]) {
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
            flag_longest: self.char_columns().into_iter().map(|c| (c, None)).collect(),
            ..NormalizeReport::default()
        }
    }

    /// The flag columns read by character position, each once.
    fn char_columns(&self) -> Vec<String> {
        let mut columns: Vec<String> = Vec::new();
        for rule in &self.schema.char_rules {
            if !columns.contains(&rule.column) {
                columns.push(rule.column.clone());
            }
        }
        columns
    }

    /// Checks, once every batch is normalized, that each flag rule reading a
    /// character position finds that position in some value of its column.
    ///
    /// # Errors
    /// [`Error::Config`] naming the schema line of the first rule whose position
    /// lies beyond every value, with the column, the position and the longest
    /// value found.
    pub fn check_flag_positions(&self) -> Result<()> {
        if self.report.rows_read == 0 {
            return Ok(());
        }
        for rule in &self.schema.char_rules {
            let longest = self
                .report
                .flag_longest
                .iter()
                .find(|(c, _)| *c == rule.column)
                .and_then(|(_, l)| l.clone());
            let (n, text) = longest.unwrap_or((0, String::new()));
            if rule.position > n {
                return Err(Error::config(
                    &self.schema.path,
                    rule.line,
                    format!(
                        "flag column \"{}\": char {} is beyond every value in {}; the longest value found is \"{}\" ({n} characters)",
                        rule.column,
                        rule.position,
                        self.path.display(),
                        crate::catalog::limits::one_line(&text)
                    ),
                ));
            }
        }
        Ok(())
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
    if schema
        .proper_motion
        .as_ref()
        .is_some_and(|p| p.errors.is_some())
    {
        for name in PM_ERROR_COLUMNS {
            fields.push(with_unit(
                Field::new(name, DataType::Float64, true),
                "mas/yr",
            ));
        }
    }
    if schema.forced.is_some() {
        fields.push(Field::new(FORCED_COLUMN, DataType::Boolean, false));
    }
    if schema.extended.is_some() {
        fields.push(Field::new(EXTENDED_COLUMN, DataType::Boolean, false));
    }
    for band in &schema.bands {
        let id = &band.band.id;
        if band.has_flux() {
            let saturated = band.saturated.as_ref().map(|_| "sat_jy");
            for suffix in [
                "flux_jy",
                "flux_err_jy",
                "flux_lo_jy",
                "flux_hi_jy",
                "ulim_jy",
            ]
            .into_iter()
            .chain(saturated)
            {
                fields.push(with_unit(
                    Field::new(format!("{id}_{suffix}"), DataType::Float64, true),
                    "Jy",
                ));
            }
        } else {
            let saturated = band.saturated.as_ref().map(|_| "sat_mag");
            for suffix in ["mag", "mag_err", "ulim_mag"].into_iter().chain(saturated) {
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

/// The column of normalized tables that marks rows measured by forced
/// photometry (present only when the schema has a `[forced]` table).
pub const FORCED_COLUMN: &str = "forced";

/// The columns of normalized tables with the 1-sigma errors of the proper
/// motion (μ_α cos δ, μ_δ), mas/yr (present only when the schema's
/// `[proper_motion]` names `ra_error` and `dec_error`; null without a motion).
pub const PM_ERROR_COLUMNS: [&str; 2] = ["pmra_cosdec_err_masyr", "pmdec_err_masyr"];

/// The column of normalized tables that marks extended rows, those given a
/// size term (present only when the schema has `[position] extended`). The
/// matcher never takes an extended source for a moving star.
pub const EXTENDED_COLUMN: &str = "extended";

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
    pm_err: Option<(f64, f64)>,
    forced: bool,
    extended: bool,
}

/// What a band measurement needs to know of its row.
struct RowContext {
    ra_deg: f64,
    dec_deg: f64,
    forced: bool,
}

/// A flag column as its test reads it.
enum FlagInput {
    Text(TextColumn),
    Bits(BitsColumn),
}

/// What a bit test expects of its column, for messages.
const BITS_EXPECTED: &str = "a non-negative integer flag (bits tested)";

impl FlagInput {
    fn new(test: &FlagTest, batch: &RecordBatch, path: &Path) -> Result<FlagInput> {
        Ok(match test {
            FlagTest::Text { column, .. } => FlagInput::Text(text(batch, column, path)?),
            FlagTest::Bits { column, .. } => FlagInput::Bits(bits(batch, column, path)?),
        })
    }

    /// Whether row `i` passes `test` (the test this input was made for).
    #[inline]
    fn matches(&self, i: usize, test: &FlagTest) -> Result<bool, RowProblem> {
        match (self, test) {
            (
                FlagInput::Text(col),
                FlagTest::Text {
                    values,
                    char_position,
                    ..
                },
            ) => Ok(col.matches(i, values, *char_position)),
            (FlagInput::Bits(col), FlagTest::Bits { column, mask, all }) => col
                .matches(i, *mask, *all)
                .map_err(|e| RowProblem::new(column, BITS_EXPECTED, e.found)),
            _ => unreachable!("flag inputs are built from their test"),
        }
    }
}

/// The size and flag columns of extended sources.
struct ExtendedInput {
    size: Option<NumberColumn>,
    flag: Option<FlagInput>,
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
    pm_err: Option<(NumberColumn, NumberColumn)>,
    extended: Option<ExtendedInput>,
    forced: Option<FlagInput>,
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

fn bits(batch: &RecordBatch, name: &str, path: &Path) -> Result<BitsColumn> {
    let array = column(batch, name, path)?;
    BitsColumn::new(array).ok_or_else(|| Error::ColumnType {
        path: path.to_path_buf(),
        column: name.to_string(),
        expected: "integers (or text holding integers) for a bit test".into(),
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
            PositionError::SignalToNoise { .. } => vec![],
        };
        let extended = match &schema.extended {
            None => None,
            Some(e) => Some(ExtendedInput {
                size: e
                    .size
                    .as_ref()
                    .map(|(c, ..)| numbers(batch, c, path))
                    .transpose()?,
                flag: e
                    .flag
                    .as_ref()
                    .map(|t| FlagInput::new(t, batch, path))
                    .transpose()?,
            }),
        };
        let forced = schema
            .forced
            .as_ref()
            .map(|f| FlagInput::new(&f.test, batch, path))
            .transpose()?;
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
        let pm_err = match schema
            .proper_motion
            .as_ref()
            .and_then(|p| p.errors.as_ref())
        {
            None => None,
            Some((ra, dec)) => Some((numbers(batch, ra, path)?, numbers(batch, dec, path)?)),
        };
        Ok(RowInputs {
            id,
            coordinates,
            errors,
            epoch,
            pm,
            pm_err,
            extended,
            forced,
        })
    }

    /// The row-level fields of row `i`; `snr_of` gives the signal-to-noise of
    /// the band a position error of kind `snr` names.
    fn read(
        &self,
        i: usize,
        schema: &SurveySchema,
        snr_of: &dyn Fn(usize) -> Option<f64>,
    ) -> Result<RowFields<'_>, RowProblem> {
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
        let mut ellipse = match &schema.position_error {
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
            PositionError::SignalToNoise {
                band,
                fwhm_arcsec,
                floor_arcsec,
                min_snr,
            } => {
                let snr = snr_of(i)
                    .filter(|s| s.is_finite())
                    .map_or(*min_snr, |s| s.max(*min_snr));
                let sigma =
                    centroid_sigma_arcsec(*fwhm_arcsec, snr, *floor_arcsec).ok_or_else(|| {
                        RowProblem::new(band, "a positive signal-to-noise ratio", snr.to_string())
                    })?;
                (sigma, sigma, 0.0)
            }
        };
        let mut extended = false;
        if let (Some(spec), Some(input)) = (&schema.extended, &self.extended) {
            let r_half = extended_radius(spec, input, i)?;
            if r_half > 0.0 {
                extended = true;
                // A circular term added to both axes keeps the ellipse's axes.
                ellipse.0 = add_extent_arcsec(ellipse.0, r_half, Some(spec.coeff));
                ellipse.1 = add_extent_arcsec(ellipse.1, r_half, Some(spec.coeff));
            }
        }
        let forced = match (&schema.forced, &self.forced) {
            (Some(spec), Some(input)) => input.matches(i, &spec.test)?,
            _ => false,
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
        // Errors of a proper motion, in its convention (μ_α* when the RA
        // component includes cos δ; else scaled by cos δ like the motion).
        let pm_err = match (&self.pm_err, &schema.proper_motion) {
            (Some((ra_col, dec_col)), Some(spec)) if pm.is_some() => {
                let (ra_name, dec_name) = spec.errors.as_ref().expect("error columns read");
                let expected = "a proper-motion error in mas/yr >= 0";
                let read = |col: &NumberColumn, name: &str| -> Result<Option<f64>, RowProblem> {
                    match col.get(i, &[], &[]) {
                        Ok(Some(v)) if v >= 0.0 && v.is_finite() => Ok(Some(v)),
                        Ok(Some(v)) => Err(RowProblem::new(name, expected, v.to_string())),
                        Ok(None) => Ok(None),
                        Err(e) => Err(RowProblem::new(name, expected, e.found)),
                    }
                };
                match (read(ra_col, ra_name)?, read(dec_col, dec_name)?) {
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
            pm_err,
            forced,
            extended,
        })
    }
}

/// The half-light radius (arcsec) of row `i` of an extended-source schema: the
/// size column's value where given, else the typical size of a flagged row;
/// with a flag, unflagged rows are point sources (0).
fn extended_radius(spec: &Extended, input: &ExtendedInput, i: usize) -> Result<f64, RowProblem> {
    let flagged = match (&spec.flag, &input.flag) {
        (Some(test), Some(flag)) => Some(flag.matches(i, test)?),
        _ => None,
    };
    if flagged == Some(false) {
        return Ok(0.0);
    }
    let size = match (&spec.size, &input.size) {
        (Some((column, unit, kind)), Some(col)) => {
            let expected = "a source size >= 0";
            match col.get(i, &[], &[]) {
                Ok(Some(v)) if v >= 0.0 => Some(Extended::half_light_arcsec(*unit, *kind, v)),
                Ok(Some(v)) => return Err(RowProblem::new(column, expected, v.to_string())),
                Ok(None) => None,
                Err(e) => return Err(RowProblem::new(column, expected, e.found)),
            }
        }
        _ => None,
    };
    Ok(match flagged {
        Some(true) => size.or(spec.typical_arcsec).unwrap_or(0.0),
        _ => size.unwrap_or(0.0),
    })
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
    pm_err: Option<(Float64Builder, Float64Builder)>,
    forced: Option<BooleanBuilder>,
    extended: Option<BooleanBuilder>,
}

impl RowBuilders {
    fn new(n: usize, schema: &SurveySchema) -> RowBuilders {
        let survey = schema.survey.as_str();
        let forced = schema.forced.is_some();
        let extended = schema.extended.is_some();
        let pm_err = schema
            .proper_motion
            .as_ref()
            .is_some_and(|p| p.errors.is_some());
        RowBuilders {
            survey: survey.to_string(),
            source_id: StringBuilder::with_capacity(n, n * 8),
            row: UInt64Builder::with_capacity(n),
            values: std::array::from_fn(|_| Float64Builder::with_capacity(n)),
            pmra: Float64Builder::with_capacity(n),
            pmdec: Float64Builder::with_capacity(n),
            pm_err: pm_err.then(|| {
                (
                    Float64Builder::with_capacity(n),
                    Float64Builder::with_capacity(n),
                )
            }),
            forced: forced.then(|| BooleanBuilder::with_capacity(n)),
            extended: extended.then(|| BooleanBuilder::with_capacity(n)),
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
        if let Some((a, d)) = &mut self.pm_err {
            a.append_option(f.pm_err.map(|p| p.0));
            d.append_option(f.pm_err.map(|p| p.1));
        }
        if let Some(b) = &mut self.forced {
            b.append_value(f.forced);
        }
        if let Some(b) = &mut self.extended {
            b.append_value(f.extended);
        }
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
        if let Some((mut a, mut d)) = self.pm_err {
            cols.push(Arc::new(a.finish()));
            cols.push(Arc::new(d.finish()));
        }
        if let Some(mut b) = self.forced {
            cols.push(Arc::new(b.finish()));
        }
        if let Some(mut b) = self.extended {
            cols.push(Arc::new(b.finish()));
        }
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
    /// A saturated measurement, with its value in output units when there is one.
    Saturated(Option<f64>),
}

enum QualityInput {
    Reject(TextColumn),
    Bits(BitsColumn),
    Range(NumberColumn),
}

/// Why a marked limit of zero or less cannot be used (counted among rejections).
const NONPOSITIVE_LIMIT_REASON: &str = "upper limit <= 0 without an error";

struct BandInput<'a> {
    spec: &'a BandColumns,
    conversion: Option<Conversion>,
    value: NumberColumn,
    error: Option<NumberColumn>,
    snr: Option<NumberColumn>,
    flag: Option<TextColumn>,
    bits_limit: Option<BitsColumn>,
    limit_column: Option<NumberColumn>,
    saturated: Option<FlagInput>,
    quality: Vec<QualityInput>,
    /// Forced rows: S/N threshold and n of max(F, 0) + n sigma.
    forced: Option<(f64, f64)>,
}

impl<'a> BandInput<'a> {
    fn new(
        spec: &'a BandColumns,
        schema: &SurveySchema,
        batch: &RecordBatch,
        path: &Path,
    ) -> Result<BandInput<'a>> {
        let conversion = spec.conversion();
        let flag = match &spec.limit {
            Some(LimitMarker::Flag { column, .. }) => Some(text(batch, column, path)?),
            _ => None,
        };
        let bits_limit = match &spec.limit {
            Some(LimitMarker::Bits { column, .. }) => Some(bits(batch, column, path)?),
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
                QualityRule::Bits { column, .. } => {
                    Ok(QualityInput::Bits(bits(batch, column, path)?))
                }
                QualityRule::Range { column, .. } => {
                    Ok(QualityInput::Range(numbers(batch, column, path)?))
                }
            })
            .collect::<Result<_>>()?;
        let optional = |c: &Option<String>| c.as_ref().map(|c| numbers(batch, c, path)).transpose();
        Ok(BandInput {
            spec,
            conversion,
            value: numbers(batch, &spec.value, path)?,
            error: optional(&spec.error)?,
            snr: optional(&spec.snr)?,
            flag,
            bits_limit,
            limit_column,
            saturated: spec
                .saturated
                .as_ref()
                .map(|t| FlagInput::new(t, batch, path))
                .transpose()?,
            quality,
            forced: schema.forced.as_ref().map(|f| (f.below, f.n)),
        })
    }

    /// The signal-to-noise ratio of row `i`: the S/N column's value where the
    /// schema names one and the cell has a value, else F/σ (1.085736/σ_m for
    /// magnitudes, FIELD notes §1.4). `None` when unknown or unreadable.
    fn snr_at(&self, i: usize) -> Option<f64> {
        let spec = self.spec;
        if let Some(col) = &self.snr
            && let Ok(Some(v)) = col.get(i, &spec.null_text, &spec.nulls)
        {
            return Some(v);
        }
        let value = self.value.get(i, &spec.null_text, &spec.nulls).ok()??;
        let err = self
            .error
            .as_ref()?
            .get(i, &spec.null_text, &spec.nulls)
            .ok()??;
        if err <= 0.0 {
            return None;
        }
        Some(if spec.unit.is_magnitude() {
            MAG_ERR_PER_INVERSE_SNR / err
        } else {
            value / err
        })
    }

    /// The outcome of row `i`; a value whose conversion overflows (a magnitude of
    /// -1000 gives an infinite flux density) is unreadable like text in a
    /// number column.
    fn evaluate(&self, i: usize, row: &RowContext) -> Result<Outcome, RowProblem> {
        let outcome = self.classify(i, row)?;
        let finite = |v: Option<f64>| v.is_none_or(f64::is_finite);
        let (value_ok, error_ok) = match &outcome {
            Outcome::Detected(f) => (
                f.flux_jy.is_finite(),
                finite(f.err_jy) && finite(f.lo_jy) && finite(f.hi_jy),
            ),
            Outcome::UpperLimit(limit, noise) => (limit.is_finite(), finite(*noise)),
            Outcome::NotDetected(limit) => (finite(*limit), true),
            Outcome::Saturated(value) => (finite(*value), true),
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

    /// Whether the saturation rule marks row `i`.
    fn is_saturated(&self, i: usize) -> Result<bool, RowProblem> {
        match (&self.spec.saturated, &self.saturated) {
            (Some(test), Some(input)) => input.matches(i, test),
            _ => Ok(false),
        }
    }

    /// The error of row `i` in the value unit: the error column's (a value ≤ 0
    /// is no error), else derived from the S/N column (σ_m = 1.085736 / SNR for
    /// magnitudes, σ = |F| / |SNR| for flux densities; FIELD notes §1.4).
    fn error_at(&self, i: usize, value: f64) -> Result<Option<f64>, RowProblem> {
        let spec = self.spec;
        let unreadable = |column: &str, e: NotANumber| {
            RowProblem::new(
                column,
                &format!("a number in unit {}", spec.unit.as_str()),
                e.found,
            )
        };
        if let (Some(col), Some(name)) = (&self.error, &spec.error) {
            return Ok(col
                .get(i, &spec.null_text, &spec.nulls)
                .map_err(|e| unreadable(name, e))?
                .filter(|e| *e > 0.0));
        }
        let (Some(col), Some(name)) = (&self.snr, &spec.snr) else {
            return Ok(None);
        };
        let snr = col
            .get(i, &spec.null_text, &spec.nulls)
            .map_err(|e| RowProblem::new(name, "a signal-to-noise ratio", e.found))?;
        Ok(match snr {
            Some(s) if spec.unit.is_magnitude() && s > 0.0 => Some(MAG_ERR_PER_INVERSE_SNR / s),
            Some(s) if !spec.unit.is_magnitude() && s != 0.0 && value != 0.0 => {
                Some((value / s).abs())
            }
            _ => None,
        })
    }

    /// A value the survey marks as an upper limit (flag, bits, limit column, a
    /// value without error): the value itself when it is a positive flux
    /// density; a limit ≤ 0 becomes the schema's rule (default max(F, 0) + 3σ)
    /// when σ is known, else is rejected. Never a limit ≤ 0.
    fn marked_limit(&self, value: f64, error: Option<f64>) -> Outcome {
        let spec = self.spec;
        let limit = spec.to_output(value);
        let Some(conversion) = &self.conversion else {
            return Outcome::UpperLimit(limit, None);
        };
        if limit > 0.0 {
            return Outcome::UpperLimit(limit, None);
        }
        let rule = spec.limit_rule.unwrap_or(DEFAULT_NONPOSITIVE_RULE);
        match conversion.to_flux_jy(value, error).err_jy {
            Some(sigma) if sigma > 0.0 => {
                Outcome::UpperLimit(rule.limit_jy(limit, sigma), Some(sigma))
            }
            _ => Outcome::Rejected(NONPOSITIVE_LIMIT_REASON.into()),
        }
    }

    fn classify(&self, i: usize, row: &RowContext) -> Result<Outcome, RowProblem> {
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
            if self.is_saturated(i)? {
                return Ok(Outcome::Saturated(None));
            }
            if let (Some(LimitMarker::Column { column }), Some(col)) =
                (&spec.limit, &self.limit_column)
                && let Some(limit) = col
                    .get(i, &spec.null_text, &spec.nulls)
                    .map_err(|e| unreadable(column, e))?
            {
                let error = self.error_at(i, limit)?;
                return Ok(self.marked_limit(limit, error));
            }
            let covered = spec
                .coverage
                .as_ref()
                .is_none_or(|c| c.contains(row.ra_deg, row.dec_deg));
            if spec.empty_not_detected && covered {
                return Ok(Outcome::NotDetected(spec.depth.map(|d| spec.to_output(d))));
            }
            return Ok(Outcome::Missing);
        };
        if let Some(LimitMarker::Sentinel { values }) = &spec.limit
            && values.contains(&value)
        {
            return Ok(Outcome::NotDetected(spec.depth.map(|d| spec.to_output(d))));
        }
        if self.is_saturated(i)? {
            return Ok(Outcome::Saturated(Some(spec.to_output(value))));
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
                (QualityRule::Bits { column, mask, all }, QualityInput::Bits(col)) => col
                    .matches(i, *mask, *all)
                    .map_err(|e| RowProblem::new(column, BITS_EXPECTED, e.found))?,
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
        let error = self.error_at(i, value)?;
        let flagged = match (&spec.limit, &self.flag, &self.bits_limit) {
            (
                Some(LimitMarker::Flag {
                    values,
                    char_position,
                    ..
                }),
                Some(flag),
                _,
            ) => flag.matches(i, values, *char_position),
            (Some(LimitMarker::Bits { column, mask, all }), _, Some(col)) => col
                .matches(i, *mask, *all)
                .map_err(|e| RowProblem::new(column, BITS_EXPECTED, e.found))?,
            _ => false,
        };
        let without_error_is_limit = matches!(spec.limit, Some(LimitMarker::MissingError))
            || spec.no_error == Some(NoErrorPolicy::Limit);
        if flagged || (without_error_is_limit && error.is_none()) {
            return Ok(self.marked_limit(value, error));
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
        if let Some(sigma) = flux.err_jy {
            // The catalog's own S/N where it gives one, else F / sigma.
            let snr = self
                .snr
                .as_ref()
                .and_then(|c| c.get(i, &spec.null_text, &spec.nulls).ok().flatten())
                .unwrap_or(flux.flux_jy / sigma);
            if let Some((below, n)) = self.forced
                && row.forced
                && snr < below
            {
                let rule = LimitRule::FluxPlusSigma { n };
                return Ok(Outcome::UpperLimit(
                    rule.limit_jy(flux.flux_jy, sigma),
                    Some(sigma),
                ));
            }
            if let Some(LimitMarker::SignalToNoise { below, rule }) = &spec.limit
                && snr < *below
            {
                return Ok(Outcome::UpperLimit(
                    rule.limit_jy(flux.flux_jy, sigma),
                    Some(sigma),
                ));
            }
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
    /// Index of the limit column; the saturated value, when kept, follows it.
    ulim: usize,
    values: Vec<Vec<f64>>,
    valid: Vec<Vec<bool>>,
    status: Vec<u8>,
}

impl BandOutput {
    fn new(n: usize, has_flux: bool, saturated: bool) -> BandOutput {
        let ulim = if has_flux { 4 } else { 2 };
        let count = ulim + 1 + usize::from(saturated);
        BandOutput {
            has_flux,
            ulim,
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
        // Then the saturated value, for bands with a saturation rule.
        let ulim = self.ulim;
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
            Outcome::Saturated(value) => {
                self.put(ulim + 1, k, value);
                BandStatus::Saturated
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::photometry::BandLibrary;
    use arrow::array::{Array, AsArray};
    use arrow::datatypes::Float64Type;

    /// Lines 1-17; a test's own keys go on line 18 and after (inside the band).
    const BASE: &str = r#"survey = "cat"
format = "csv"
id = "id"

[position]
ra = "ra"
dec = "dec"
error = { kind = "fixed", arcsec = 0.1 }

[epoch]
year = 2010.0

[[band]]
band = "irac_36"
value = "f"
unit = "mJy"
error = "e"
"#;

    fn schema(text: &str) -> SurveySchema {
        SurveySchema::from_str(text, Path::new("s.toml"), &BandLibrary::builtin()).unwrap()
    }

    fn schema_error(text: &str) -> String {
        SurveySchema::from_str(text, Path::new("s.toml"), &BandLibrary::builtin())
            .unwrap_err()
            .to_string()
    }

    /// A batch of text columns, as the CSV reader gives them (`""` is an empty cell).
    fn batch(columns: &[(&str, &[&str])]) -> RecordBatch {
        let fields: Vec<Field> = columns
            .iter()
            .map(|(n, _)| Field::new(*n, DataType::Utf8, true))
            .collect();
        let arrays: Vec<ArrayRef> = columns
            .iter()
            .map(|(_, v)| Arc::new(StringArray::from(v.to_vec())) as ArrayRef)
            .collect();
        RecordBatch::try_new(Arc::new(Schema::new(fields)), arrays).unwrap()
    }

    fn normalize(schema: &SurveySchema, b: &RecordBatch) -> Result<(RecordBatch, Normalizer)> {
        let mut n = Normalizer::new(schema, Path::new("c.csv"), NormalizeOptions::default());
        n.check_file(&b.schema())?;
        let out = n.normalize(b)?;
        Ok((out, n))
    }

    fn floats(b: &RecordBatch, name: &str) -> Vec<Option<f64>> {
        let a = b
            .column_by_name(name)
            .unwrap()
            .as_primitive::<Float64Type>();
        (0..a.len())
            .map(|i| a.is_valid(i).then(|| a.value(i)))
            .collect()
    }

    fn statuses(b: &RecordBatch, name: &str) -> Vec<String> {
        let a = arrow::compute::cast(b.column_by_name(name).unwrap(), &DataType::Utf8).unwrap();
        a.as_string::<i32>()
            .iter()
            .map(|s| s.unwrap().to_string())
            .collect()
    }

    #[track_caller]
    fn close(got: Option<f64>, want: f64) {
        let got = got.expect("a value");
        assert!(
            (got - want).abs() <= 1e-12 * want.abs().max(1e-12),
            "{got} != {want}"
        );
    }

    const POS: [(&str, &[&str]); 3] = [
        ("id", &["a", "b", "c"]),
        ("ra", &["10.0", "10.1", "10.2"]),
        ("dec", &["60.0", "60.0", "-60.0"]),
    ];

    fn with_pos(extra: &[(&'static str, &'static [&'static str])]) -> RecordBatch {
        let mut cols: Vec<(&str, &[&str])> = POS.to_vec();
        cols.extend_from_slice(extra);
        batch(&cols)
    }

    #[test]
    fn a_bit_of_an_integer_flag_marks_an_upper_limit() {
        let s = schema(&format!(
            "{BASE}limit = {{ kind = \"flag\", column = \"fl\", bit = 3 }}\n"
        ));
        // 8 = bit 3; 4 = bit 2 only; empty = no bits.
        let b = with_pos(&[
            ("f", &["2.0", "2.0", "2.0"]),
            ("e", &["0.1", "0.1", "0.1"]),
            ("fl", &["8", "4", ""]),
        ]);
        let (out, n) = normalize(&s, &b).unwrap();
        assert_eq!(
            statuses(&out, "irac_36_status"),
            ["upper_limit", "detected", "detected"]
        );
        // The limit is the value itself: 2 mJy = 0.002 Jy.
        close(floats(&out, "irac_36_ulim_jy")[0], 0.002);
        assert_eq!(floats(&out, "irac_36_flux_jy")[0], None);
        assert_eq!(n.report().bands[0].count(BandStatus::UpperLimit), 1);

        let bad = with_pos(&[
            ("f", &["2.0", "2.0", "2.0"]),
            ("e", &["0.1", "0.1", "0.1"]),
            ("fl", &["8", "4", "3.5"]),
        ]);
        assert_eq!(
            normalize(&s, &bad).err().unwrap().to_string(),
            "c.csv: row 3, column \"fl\": expected a non-negative integer flag (bits tested), found \"3.5\""
        );
    }

    #[test]
    fn a_quality_bit_test_rejects_with_its_reason() {
        let s = schema(&format!(
            "{BASE}quality = [{{ column = \"fl\", mask = 0x30, all = true }}]\n"
        ));
        // 0x30 = 48: both bits; 0x10 = 16: one of them.
        let b = with_pos(&[
            ("f", &["2.0", "2.0", "2.0"]),
            ("e", &["0.1", "0.1", "0.1"]),
            ("fl", &["48", "16", "0"]),
        ]);
        let (out, n) = normalize(&s, &b).unwrap();
        assert_eq!(
            statuses(&out, "irac_36_status"),
            ["rejected", "detected", "detected"]
        );
        assert_eq!(
            n.report().bands[0]
                .rejected_by
                .get("fl has all of bits 0x30"),
            Some(&1)
        );
    }

    #[test]
    fn saturated_values_are_neither_detections_nor_limits() {
        let s = schema(&format!(
            "{BASE}saturated = {{ column = \"fl\", mask = 0x0c }}\n"
        ));
        // 4 and 8 are bits of 0x0c; 1 is not. The third value is empty but flagged.
        let b = with_pos(&[
            ("f", &["500.0", "2.0", ""]),
            ("e", &["0.1", "0.1", ""]),
            ("fl", &["4", "1", "8"]),
        ]);
        let (out, n) = normalize(&s, &b).unwrap();
        assert_eq!(
            statuses(&out, "irac_36_status"),
            ["saturated", "detected", "saturated"]
        );
        assert_eq!(floats(&out, "irac_36_flux_jy")[0], None);
        assert_eq!(floats(&out, "irac_36_ulim_jy")[0], None);
        assert_eq!(floats(&out, "irac_36_flux_err_jy")[0], None);
        // The measured value stays, in a column of its own: 500 mJy = 0.5 Jy.
        let sat = floats(&out, "irac_36_sat_jy");
        close(sat[0], 0.5);
        assert_eq!((sat[1], sat[2]), (None, None));
        assert_eq!(n.report().bands[0].count(BandStatus::Saturated), 2);
        assert_eq!(n.report().bands[0].count(BandStatus::Detected), 1);
        // Without a saturation rule, no such column.
        let plain = output_schema(&schema(BASE));
        assert!(plain.field_with_name("irac_36_sat_jy").is_err());
    }

    #[test]
    fn forced_rows_below_the_threshold_become_limits_and_carry_their_marker() {
        let s = schema(&BASE.replace(
            "[[band]]",
            "[forced]\ncolumn = \"fp\"\nvalues = [\"1\"]\n\n[[band]]",
        ));
        // S/N 2 (forced), -2 (forced), 2 (not forced): default threshold 3, n = 3.
        let b = with_pos(&[
            ("f", &["1.0", "-1.0", "1.0"]),
            ("e", &["0.5", "0.5", "0.5"]),
            ("fp", &["1", "1", "0"]),
        ]);
        let (out, _) = normalize(&s, &b).unwrap();
        assert_eq!(
            statuses(&out, "irac_36_status"),
            ["upper_limit", "upper_limit", "detected"]
        );
        // max(F, 0) + 3 sigma: 1 + 1.5 = 2.5 mJy; 0 + 1.5 = 1.5 mJy (by hand).
        let ulim = floats(&out, "irac_36_ulim_jy");
        close(ulim[0], 0.0025);
        close(ulim[1], 0.0015);
        close(floats(&out, "irac_36_flux_err_jy")[0], 0.0005);
        let forced = out.column_by_name(FORCED_COLUMN).unwrap().as_boolean();
        assert_eq!(
            (0..3).map(|i| forced.value(i)).collect::<Vec<_>>(),
            [true, true, false]
        );
        let table = crate::crossmatch::SourceTable::from_batches("cat", &[out], Path::new("c.csv"))
            .unwrap();
        assert!(table.is_forced(0) && table.is_forced(1) && !table.is_forced(2));
        assert!(table.has_forced());
        // Without [forced], no marker column and nothing forced.
        let (plain, _) = normalize(&schema(BASE), &b).unwrap();
        assert!(plain.column_by_name(FORCED_COLUMN).is_none());
        let table =
            crate::crossmatch::SourceTable::from_batches("cat", &[plain], Path::new("c.csv"))
                .unwrap();
        assert!(!table.has_forced() && !table.is_forced(0));
    }

    #[test]
    fn forced_rows_take_their_own_threshold_and_n() {
        let s = schema(&BASE.replace(
            "[[band]]",
            "[forced]\ncolumn = \"fl\"\nbit = 0\nbelow = 5.0\nn = 2.0\n\n[[band]]",
        ));
        // S/N 4 < 5 for the forced row (bit 0 set); the other is not forced.
        let b = with_pos(&[
            ("f", &["2.0", "2.0", "2.0"]),
            ("e", &["0.5", "0.5", "0.5"]),
            ("fl", &["1", "2", ""]),
        ]);
        let (out, _) = normalize(&s, &b).unwrap();
        assert_eq!(
            statuses(&out, "irac_36_status"),
            ["upper_limit", "detected", "detected"]
        );
        // 2 + 2 x 0.5 = 3 mJy (by hand).
        close(floats(&out, "irac_36_ulim_jy")[0], 0.003);
    }

    #[test]
    fn empty_means_not_detected_where_the_band_covers() {
        let dir = tempfile::tempdir().unwrap();
        // Order-0 NESTED cells 0-3 are the northern cap: Dec +60 in, Dec -60 out
        // (the base-pixel numbering of Górski et al. 2005, ApJ 622, 759; from memory).
        std::fs::write(dir.path().join("band_moc.txt"), "0/0-3\n").unwrap();
        let text = format!("{BASE}depth = 0.05\nempty = \"not_detected\"\n");
        let everywhere = schema(&text);
        let b = with_pos(&[("f", &["", "NaN", ""]), ("e", &["", "", ""])]);
        let (out, n) = normalize(&everywhere, &b).unwrap();
        assert_eq!(
            statuses(&out, "irac_36_status"),
            ["not_detected", "not_detected", "not_detected"]
        );
        // The limit is the depth: 0.05 mJy.
        close(floats(&out, "irac_36_ulim_jy")[0], 5e-5);
        assert_eq!(n.report().bands[0].count(BandStatus::NotDetected), 3);

        let path = dir.path().join("s.toml");
        let covered = SurveySchema::from_str(
            &format!("{text}coverage = \"band_moc.txt\"\n"),
            &path,
            &BandLibrary::builtin(),
        )
        .unwrap();
        let (out, _) = normalize(&covered, &b).unwrap();
        assert_eq!(
            statuses(&out, "irac_36_status"),
            ["not_detected", "not_detected", "missing"]
        );
        // Without the setting an empty value stays missing.
        let (out, _) = normalize(&schema(BASE), &b).unwrap();
        assert_eq!(
            statuses(&out, "irac_36_status"),
            ["missing", "missing", "missing"]
        );
    }

    #[test]
    fn errors_come_from_a_signal_to_noise_column() {
        // Vega magnitudes with S/N 10: sigma_m = 1.0857362 / 10, so sigma_F / F =
        // 0.921034 x 0.10857362 = 0.1 (FIELD notes §1.4, first order).
        let text = BASE.replace(
            "unit = \"mJy\"\nerror = \"e\"",
            "unit = \"vega_mag\"\nsnr = \"sn\"",
        );
        let b = with_pos(&[("f", &["10.0", "10.0", "10.0"]), ("sn", &["10", "", "0"])]);
        let (out, _) = normalize(&schema(&text), &b).unwrap();
        let flux = floats(&out, "irac_36_flux_jy");
        let err = floats(&out, "irac_36_flux_err_jy");
        // 10 mag on the 280.9 Jy zero point (Reach et al. 2005): 0.02809 Jy.
        close(flux[0], 0.02809);
        close(err[0], 0.002809);
        // No S/N, or S/N 0: no error.
        assert_eq!((err[1], err[2]), (None, None));

        // Flux densities: sigma = |F| / S/N, and the column's S/N decides limits.
        let text = BASE.replace("error = \"e\"", "snr = \"sn\"")
            + "limit = { kind = \"snr\", below = 5.0, rule = \"flux_plus_sigma\", n = 3.0 }\n";
        let b = with_pos(&[("f", &["2.0", "2.0", "-2.0"]), ("sn", &["4", "8", "-4"])]);
        let (out, _) = normalize(&schema(&text), &b).unwrap();
        assert_eq!(
            statuses(&out, "irac_36_status"),
            ["upper_limit", "detected", "upper_limit"]
        );
        // sigma = 0.5 mJy: 2 + 1.5 = 3.5 mJy; 0 + 1.5 = 1.5 mJy; detection error 0.25 mJy.
        let ulim = floats(&out, "irac_36_ulim_jy");
        close(ulim[0], 0.0035);
        close(ulim[2], 0.0015);
        close(floats(&out, "irac_36_flux_err_jy")[1], 0.00025);

        // With an error column too, the error is the column's and the S/N the catalog's.
        let text = BASE.to_string()
            + "snr = \"sn\"\nlimit = { kind = \"snr\", below = 3.0, rule = \"sigma\", n = 3.0 }\n";
        let b = with_pos(&[
            ("f", &["2.0", "2.0", "2.0"]),
            ("e", &["0.1", "0.1", "0.1"]),
            ("sn", &["2", "20", ""]),
        ]);
        let (out, _) = normalize(&schema(&text), &b).unwrap();
        assert_eq!(
            statuses(&out, "irac_36_status"),
            ["upper_limit", "detected", "detected"]
        );
        close(floats(&out, "irac_36_ulim_jy")[0], 0.0003);
    }

    #[test]
    fn a_flag_position_beyond_every_value_names_the_schema_line() {
        let s = schema(&format!(
            "{BASE}limit = {{ kind = \"flag\", column = \"q\", values = [\"U\"], char = 4 }}\n"
        ));
        let b = with_pos(&[
            ("f", &["2.0", "2.0", "2.0"]),
            ("e", &["0.1", "0.1", "0.1"]),
            ("q", &["AAU", "AU", ""]),
        ]);
        let (_, n) = normalize(&s, &b).unwrap();
        assert_eq!(
            n.check_flag_positions().unwrap_err().to_string(),
            "s.toml:18: flag column \"q\": char 4 is beyond every value in c.csv; the longest value found is \"AAU\" (3 characters)"
        );
        // Quality rules and saturation flags are checked the same way.
        let s = schema(&format!(
            "{BASE}quality = [{{ column = \"q\", reject = [\"X\"], char = 3 }}]\nsaturated = {{ column = \"q\", values = [\"S\"], char = 5 }}\n"
        ));
        let (_, n) = normalize(&s, &b).unwrap();
        assert_eq!(
            n.check_flag_positions().unwrap_err().to_string(),
            "s.toml:19: flag column \"q\": char 5 is beyond every value in c.csv; the longest value found is \"AAU\" (3 characters)"
        );
        // A position some value reaches passes, even if other values are shorter.
        let s = schema(&format!(
            "{BASE}limit = {{ kind = \"flag\", column = \"q\", values = [\"U\"], char = 3 }}\n"
        ));
        let (out, n) = normalize(&s, &b).unwrap();
        n.check_flag_positions().unwrap();
        assert_eq!(
            statuses(&out, "irac_36_status"),
            ["upper_limit", "detected", "detected"]
        );
    }

    #[test]
    fn a_flagged_limit_is_never_zero_or_negative() {
        let flag = "limit = { kind = \"flag\", column = \"q\", values = [\"<\"] }\n";
        let b = with_pos(&[
            ("f", &["-0.3", "0.0", "-0.3"]),
            ("e", &["0.2", "0.2", ""]),
            ("q", &["<", "<", "<"]),
        ]);
        let (out, n) = normalize(&schema(&format!("{BASE}{flag}")), &b).unwrap();
        assert_eq!(
            statuses(&out, "irac_36_status"),
            ["upper_limit", "upper_limit", "rejected"]
        );
        // max(F, 0) + 3 sigma = 0.6 mJy for both (common practice default).
        let ulim = floats(&out, "irac_36_ulim_jy");
        close(ulim[0], 0.0006);
        close(ulim[1], 0.0006);
        assert_eq!(ulim[2], None);
        close(floats(&out, "irac_36_flux_err_jy")[0], 0.0002);
        assert_eq!(
            n.report().bands[0]
                .rejected_by
                .get("upper limit <= 0 without an error"),
            Some(&1)
        );
        // The schema's own rule: n x sigma with n = 2 gives 0.4 mJy.
        let own = flag.replace(" }", ", rule = \"sigma\", n = 2.0 }");
        let (out, _) = normalize(&schema(&format!("{BASE}{own}")), &b).unwrap();
        close(floats(&out, "irac_36_ulim_jy")[0], 0.0004);
        // A positive flagged value is the limit as it stands.
        let b = with_pos(&[
            ("f", &["0.3", "0.3", "0.3"]),
            ("e", &["0.2", "", "0.2"]),
            ("q", &["<", "<", ""]),
        ]);
        let (out, _) = normalize(&schema(&format!("{BASE}{flag}")), &b).unwrap();
        close(floats(&out, "irac_36_ulim_jy")[0], 0.0003);
        close(floats(&out, "irac_36_ulim_jy")[1], 0.0003);
    }

    #[test]
    fn a_magnitude_band_states_what_its_missing_errors_mean() {
        let no_err = BASE.replace("unit = \"mJy\"\nerror = \"e\"\n", "unit = \"vega_mag\"\n");
        assert_eq!(
            schema_error(&no_err),
            "s.toml:13: band \"irac_36\" gives magnitudes without an error column; name it with error = \"...\", give the signal-to-noise with snr = \"...\", or say what the values are with no_error = \"unknown\" (measurements whose errors are unknown) or no_error = \"limit\" (every value is an upper limit)"
        );
        let b = with_pos(&[("f", &["10.0", "10.0", ""])]);
        let (out, _) =
            normalize(&schema(&format!("{no_err}no_error = \"unknown\"\n")), &b).unwrap();
        assert_eq!(
            statuses(&out, "irac_36_status"),
            ["detected", "detected", "missing"]
        );
        close(floats(&out, "irac_36_flux_jy")[0], 0.02809);
        assert_eq!(floats(&out, "irac_36_flux_err_jy")[0], None);
        let (out, _) = normalize(&schema(&format!("{no_err}no_error = \"limit\"\n")), &b).unwrap();
        assert_eq!(
            statuses(&out, "irac_36_status"),
            ["upper_limit", "upper_limit", "missing"]
        );
        close(floats(&out, "irac_36_ulim_jy")[0], 0.02809);
        // Flux-density bands need no policy.
        let flux = BASE.replace("error = \"e\"\n", "");
        assert!(
            SurveySchema::from_str(&flux, Path::new("s.toml"), &BandLibrary::builtin()).is_ok()
        );
        assert_eq!(
            schema_error(&format!("{BASE}no_error = \"unknown\"\n")),
            "s.toml:18: no_error says what a band without an error column means; this band has an error or snr column"
        );
        assert_eq!(
            schema_error(&format!("{no_err}no_error = \"maybe\"\n")),
            "s.toml:17: no_error \"maybe\" is unknown; expected \"unknown\" (measurements whose errors are unknown) or \"limit\" (every value is an upper limit)"
        );
    }

    #[test]
    fn a_position_error_from_signal_to_noise() {
        let text = BASE.replace(
            "error = { kind = \"fixed\", arcsec = 0.1 }",
            "error = { kind = \"snr\", band = \"irac_36\", fwhm_arcsec = 1.66, floor_arcsec = 0.1 }",
        );
        // S/N 10, and no value (taken at the default min_snr 3).
        let b = with_pos(&[("f", &["1.0", "", "1.0"]), ("e", &["0.1", "", "0.5"])]);
        let (out, _) = normalize(&schema(&text), &b).unwrap();
        let major = floats(&out, "pos_err_major_arcsec");
        let minor = floats(&out, "pos_err_minor_arcsec");
        // sqrt((0.600561 x 1.66 / 10)^2 + 0.1^2) = 0.141205 (FIELD notes §5.12, by hand);
        // at S/N 3: 0.347031; S/N 2 is below min_snr 3, so also 0.347031.
        close(major[0], 0.141_204_554_234_925_67);
        close(minor[0], 0.141_204_554_234_925_67);
        close(major[1], 0.347_030_676_464_777_1);
        close(major[2], 0.347_030_676_464_777_1);

        let unknown = text.replace("band = \"irac_36\", fwhm", "band = \"irac_45\", fwhm");
        assert_eq!(
            schema_error(&unknown),
            "s.toml:8: position error of kind \"snr\" names band \"irac_45\", which is not a band of this schema (it has: irac_36)"
        );
        let no_fwhm = text.replace("fwhm_arcsec = 1.66, ", "");
        assert_eq!(
            schema_error(&no_fwhm),
            "s.toml:8: position error of kind \"snr\" needs \"fwhm_arcsec\" (the survey's PSF FWHM)"
        );
        let no_noise = text.replace("error = \"e\"\n", "");
        assert_eq!(
            schema_error(&no_noise),
            "s.toml:8: position error of kind \"snr\" needs the signal-to-noise of band \"irac_36\", which has neither an error nor an snr column"
        );
    }

    #[test]
    fn extended_sources_grow_their_positional_error() {
        // c = 0.2 (default), r_half 1": sqrt(0.1^2 + 0.2^2) = 0.223607" (FIELD notes §5.13, by hand).
        let sized = BASE.replace(
            "error = { kind = \"fixed\", arcsec = 0.1 }",
            "error = { kind = \"fixed\", arcsec = 0.1 }\nextended = { size = \"rh\", unit = \"arcsec\" }",
        );
        let b = with_pos(&[
            ("f", &["1.0", "1.0", "1.0"]),
            ("e", &["0.1", "0.1", "0.1"]),
            ("rh", &["1.0", "", "0"]),
            ("ext", &["1", "1", "0"]),
        ]);
        let (out, _) = normalize(&schema(&sized), &b).unwrap();
        let major = floats(&out, "pos_err_major_arcsec");
        close(major[0], 0.223_606_797_749_979);
        close(
            floats(&out, "pos_err_minor_arcsec")[0],
            0.223_606_797_749_979,
        );
        close(major[1], 0.1);
        close(major[2], 0.1);
        // Rows given a size term are marked extended; the others (no size, size 0) are not.
        let marked = out.column_by_name(EXTENDED_COLUMN).unwrap().as_boolean();
        assert_eq!(
            (0..3).map(|i| marked.value(i)).collect::<Vec<_>>(),
            [true, false, false]
        );
        let table = crate::crossmatch::SourceTable::from_batches(
            "s",
            std::slice::from_ref(&out),
            Path::new("s"),
        )
        .unwrap();
        assert!(table.is_extended(0) && !table.is_extended(1) && table.has_extended());
        // A Gaussian FWHM of 2" is a half-light radius of 1".
        let fwhm = sized
            .replace(
                "unit = \"arcsec\" }",
                "unit = \"arcsec\", kind = \"gaussian_fwhm\" }",
            )
            .replace("rh", "fw");
        let b2 = with_pos(&[
            ("f", &["1.0", "1.0", "1.0"]),
            ("e", &["0.1", "0.1", "0.1"]),
            ("fw", &["2.0", "", ""]),
        ]);
        let (out, _) = normalize(&schema(&fwhm), &b2).unwrap();
        close(
            floats(&out, "pos_err_major_arcsec")[0],
            0.223_606_797_749_979,
        );
        // A flag with a typical size: 1.5" gives sqrt(0.01 + 0.09) = 0.316228".
        let flagged = BASE.replace(
            "error = { kind = \"fixed\", arcsec = 0.1 }",
            "error = { kind = \"fixed\", arcsec = 0.1 }\nextended = { flag = { column = \"ext\", values = [\"1\"] }, typical_arcsec = 1.5 }",
        );
        let (out, _) = normalize(&schema(&flagged), &b).unwrap();
        let major = floats(&out, "pos_err_major_arcsec");
        close(major[0], 0.316_227_766_016_837_94);
        close(major[1], 0.316_227_766_016_837_94);
        close(major[2], 0.1);
        // Size and flag: flagged rows use their size, else the typical size;
        // unflagged rows stay point sources.
        let both = BASE.replace(
            "error = { kind = \"fixed\", arcsec = 0.1 }",
            "error = { kind = \"fixed\", arcsec = 0.1 }\nextended = { size = \"rh\", flag = { column = \"ext\", values = [\"1\"] }, typical_arcsec = 1.5 }",
        );
        let b3 = with_pos(&[
            ("f", &["1.0", "1.0", "1.0"]),
            ("e", &["0.1", "0.1", "0.1"]),
            ("rh", &["1.0", "", "3.0"]),
            ("ext", &["1", "1", "0"]),
        ]);
        let (out, _) = normalize(&schema(&both), &b3).unwrap();
        let major = floats(&out, "pos_err_major_arcsec");
        close(major[0], 0.223_606_797_749_979);
        close(major[1], 0.316_227_766_016_837_94);
        close(major[2], 0.1);
        // A negative size is bad input.
        let bad = with_pos(&[
            ("f", &["1.0", "1.0", "1.0"]),
            ("e", &["0.1", "0.1", "0.1"]),
            ("rh", &["1.0", "-2", ""]),
        ]);
        assert_eq!(
            normalize(&schema(&sized), &bad).err().unwrap().to_string(),
            "c.csv: row 2, column \"rh\": expected a source size >= 0, found \"-2\""
        );
    }

    #[test]
    fn proper_motion_errors_travel_with_the_motion() {
        let pm = BASE.replace(
            "[[band]]",
            "[proper_motion]\nra = \"pmra\"\ndec = \"pmde\"\nra_includes_cos_dec = false\nra_error = \"epmra\"\ndec_error = \"epmde\"\n\n[[band]]",
        );
        let b = with_pos(&[
            ("f", &["1.0", "1.0", "1.0"]),
            ("e", &["0.1", "0.1", "0.1"]),
            ("pmra", &["10", "10", ""]),
            ("pmde", &["5", "5", ""]),
            ("epmra", &["2.0", "", "1.0"]),
            ("epmde", &["1.0", "1.0", "1.0"]),
        ]);
        let (out, _) = normalize(&schema(&pm), &b).unwrap();
        // μ_α without cos δ at δ = 60°: the error is scaled like the motion, 2 · 0.5 = 1.
        let era = floats(&out, PM_ERROR_COLUMNS[0]);
        close(era[0], 1.0);
        close(floats(&out, PM_ERROR_COLUMNS[1])[0], 1.0);
        // One component missing, or no motion at all: no errors.
        assert_eq!(era[1], None);
        assert_eq!(era[2], None);
        let table = crate::crossmatch::SourceTable::from_batches(
            "s",
            std::slice::from_ref(&out),
            Path::new("s"),
        )
        .unwrap();
        let (era0, ede0) = table.pm_err(0);
        close(Some(era0), 1.0);
        close(Some(ede0), 1.0);
        assert!(table.pm_err(1).0.is_nan());
        // Without error columns there are none.
        let plain = output_schema(&schema(BASE));
        assert!(plain.column_with_name(PM_ERROR_COLUMNS[0]).is_none());
        // A negative error is bad input naming its column.
        let bad = with_pos(&[
            ("f", &["1.0", "1.0", "1.0"]),
            ("e", &["0.1", "0.1", "0.1"]),
            ("pmra", &["10", "10", "10"]),
            ("pmde", &["5", "5", "5"]),
            ("epmra", &["2.0", "1.0", "1.0"]),
            ("epmde", &["1.0", "-3", "1.0"]),
        ]);
        assert_eq!(
            normalize(&schema(&pm), &bad).err().unwrap().to_string(),
            "c.csv: row 2, column \"epmde\": expected a proper-motion error in mas/yr >= 0, found \"-3\""
        );
    }

    #[test]
    fn new_settings_refuse_impossible_values_with_their_line() {
        let band = |extra: &str| schema_error(&format!("{BASE}{extra}\n"));
        assert_eq!(
            band("limit = { kind = \"flag\", column = \"fl\", bit = 64 }"),
            "s.toml:18: bit must be a bit number in [0, 63] (0 is the least significant), found 64"
        );
        assert_eq!(
            band("limit = { kind = \"flag\", column = \"fl\", bit = 1, mask = 3 }"),
            "s.toml:18: a bit test takes either bit = k (one bit) or mask = m (several), not both"
        );
        assert_eq!(
            band("saturated = { column = \"fl\", mask = 0 }"),
            "s.toml:18: mask must be a positive integer such as 0x0c, found 0"
        );
        assert_eq!(
            band("saturated = { column = \"fl\", mask = 4, values = [\"S\"] }"),
            "s.toml:18: a bit test (bit or mask) reads an integer column; it takes no values or char"
        );
        assert_eq!(
            band("saturated = { column = \"fl\", values = [\"S\"], all = true }"),
            "s.toml:18: all applies only to a bit test (mask)"
        );
        assert_eq!(
            band("empty = \"nothing\""),
            "s.toml:18: empty \"nothing\" is unknown; expected \"not_detected\" (an empty value is a non-detection where the band covers) or \"missing\" (the default)"
        );
        assert_eq!(
            band("coverage = \"moc.txt\""),
            "s.toml:18: coverage is the band's footprint for empty = \"not_detected\"; set that too"
        );
        assert_eq!(
            band("limit = { kind = \"sentinel\", values = [99.0], n = 2.0 }"),
            "s.toml:18: limit kind \"sentinel\" gives no value to bound; rule and n do not apply"
        );
        let forced = |keys: &str| {
            schema_error(&BASE.replace("[[band]]", &format!("[forced]\n{keys}\n\n[[band]]")))
        };
        assert_eq!(
            forced("column = \"fp\"\nvalues = [\"1\"]\nbelow = 0.0"),
            "s.toml:13: forced \"below\" must lie in (0, 1000], found 0"
        );
        let extended = |value: &str| {
            schema_error(&BASE.replace(
                "error = { kind = \"fixed\", arcsec = 0.1 }",
                &format!("error = {{ kind = \"fixed\", arcsec = 0.1 }}\nextended = {value}"),
            ))
        };
        assert_eq!(
            extended("{ coeff = 0.2 }"),
            "s.toml:9: extended needs size = \"column\" (a size per source), flag = { ... } (which rows are extended), or both"
        );
        assert_eq!(
            extended("{ flag = { column = \"ext\", values = [\"1\"] } }"),
            "s.toml:9: an extended flag without a size column needs typical_arcsec (the survey's typical half-light radius)"
        );
        assert_eq!(
            extended("{ size = \"rh\", kind = \"petrosian\" }"),
            "s.toml:9: extended size kind \"petrosian\" is unknown; expected half_light, gaussian_fwhm or exponential_scale"
        );
        assert_eq!(
            extended("{ size = \"rh\", coeff = 2.0 }"),
            "s.toml:9: extended coeff must lie in (0, 1] (sigma_ext = coeff x half-light radius), found 2"
        );
    }
}
