//! The survey schema: a small TOML file that says how to read one survey's catalog.
//!
//! [`SurveySchema::from_file`] parses and validates a schema against a
//! [`BandLibrary`]; every problem names the schema line to fix. The shape, in
//! brief (the full reference is in the README):
//!
//! ```toml
//! survey = "nearir"            # catalog name used in outputs
//! format = "csv"               # csv | tsv | parquet | fits | votable
//! id = "src"                   # identifier column
//!
//! [position]
//! ra = "ra"                    # column names
//! dec = "dec"
//! format = "degrees"           # degrees | sexagesimal (RA in hours, Dec in degrees)
//! error = { kind = "fixed", arcsec = 0.1 }
//!
//! [epoch]
//! year = 2001.3                # or column = "mjd", unit = "mjd"
//!
//! [[band]]
//! band = "tmass_j"             # id in the band library
//! value = "jmag"
//! unit = "vega_mag"
//! error = "e_jmag"
//! nulls = [99.999]
//! limit = { kind = "flag", column = "qual", values = ["U"], char = 1 }
//! ```
//!
//! Further keys (all in the README's schema reference): flag tests on bits of
//! integer columns (`bit = 3`, `mask = 0x0c`, `all`) wherever a flag is tested;
//! a band's `saturated` test, `snr` column, `no_error` policy (required for a
//! magnitude band without `error` or `snr`), `empty = "not_detected"` with an
//! optional `coverage` MOC; a `[forced]` table marking forced-photometry rows;
//! a position error of kind `snr`; and `[position] extended` sizes or flags.
//!
//! Checking the schema against an actual file (do the named columns exist, do
//! they hold numbers, does every flag `char` position exist) happens when the
//! file is read, in [`super::normalize`].

use std::path::{Path, PathBuf};

use serde::Deserialize;
use toml::Spanned;

use crate::error::{Error, Result, line_of_offset, read_toml_text, toml_error};
use crate::photometry::{AB_ZERO_POINT_JY, Band, BandLibrary, Conversion, LimitRule, ValueUnit};

/// Largest accepted fixed 1-sigma position error, arcsec (one degree).
pub const MAX_POSITION_ERROR_ARCSEC: f64 = 3600.0;
/// Largest accepted magnitude offset (`offset_mag`), magnitudes: a factor 10^8 in flux.
pub const MAX_OFFSET_MAG: f64 = 20.0;
/// Largest accepted signal-to-noise threshold or sigma multiple of an `snr` limit.
pub const MAX_SIGMA_MULTIPLE: f64 = 1000.0;
/// Accepted survey depths `depth_mag`, magnitudes in the band's own system
/// (brighter than 0 or fainter than 40 is no survey's limit; common practice).
pub const DEPTH_MAG_RANGE: std::ops::RangeInclusive<f64> = 0.0..=40.0;
/// Accepted fixed epochs, Julian years.
pub const EPOCH_RANGE_YR: std::ops::RangeInclusive<f64> = 1800.0..=2200.0;

/// How the catalog file is encoded.
#[derive(Debug, Clone, PartialEq)]
pub enum FileFormat {
    /// Delimited text (CSV or TSV), optionally gzip-compressed.
    Csv(CsvOptions),
    /// Apache Parquet.
    Parquet,
    /// A FITS binary table; `hdu` counts the primary HDU as 0 (None: first BINTABLE).
    Fits {
        /// The HDU holding the table.
        hdu: Option<usize>,
    },
    /// An IVOA VOTable; `table` is the 0-based index of the TABLE element.
    Votable {
        /// Which TABLE of the document.
        table: usize,
    },
}

/// Options of the delimited-text reader.
#[derive(Debug, Clone, PartialEq)]
pub struct CsvOptions {
    /// Field delimiter byte.
    pub delimiter: u8,
    /// Lines starting with this byte are skipped.
    pub comment: Option<u8>,
    /// Quote byte.
    pub quote: u8,
    /// Whether the first non-comment line holds column names.
    pub header: bool,
    /// Gzip-compressed; `None` decides by the `.gz` file extension.
    pub gzip: Option<bool>,
}

impl Default for CsvOptions {
    fn default() -> Self {
        CsvOptions {
            delimiter: b',',
            comment: Some(b'#'),
            quote: b'"',
            header: true,
            gzip: None,
        }
    }
}

/// How positions are written in the file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PositionFormat {
    /// Decimal degrees in numeric (or numeric-text) columns.
    Degrees,
    /// Text: RA in hours (`hh:mm:ss.s` or `hh mm ss.s`), Dec in degrees (`±dd:mm:ss.s`).
    Sexagesimal,
}

/// Unit of an angle column.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum AngleUnit {
    /// Arcseconds.
    Arcsec,
    /// Milliarcseconds.
    Mas,
    /// Degrees.
    Deg,
}

impl AngleUnit {
    /// Factor turning a value in this unit into arcseconds.
    pub fn to_arcsec(self) -> f64 {
        match self {
            AngleUnit::Arcsec => 1.0,
            AngleUnit::Mas => 1e-3,
            AngleUnit::Deg => 3600.0,
        }
    }
}

/// The positional uncertainty model of a survey (all values 1-sigma).
#[derive(Debug, Clone, PartialEq)]
pub enum PositionError {
    /// The same circular 1-sigma error for every source.
    Fixed {
        /// Per-axis 1-sigma error, arcsec.
        sigma_arcsec: f64,
    },
    /// A per-source circular 1-sigma error column.
    Circular {
        /// Column name.
        column: String,
        /// Column unit.
        unit: AngleUnit,
    },
    /// A per-source error ellipse: semi-major and semi-minor axes and position angle
    /// (degrees east of north).
    Ellipse {
        /// Semi-major axis column.
        major: String,
        /// Semi-minor axis column.
        minor: String,
        /// Position-angle column, degrees east of north.
        angle: String,
        /// Unit of the two axes.
        unit: AngleUnit,
    },
    /// Separate 1-sigma errors along RA (as a true angle, i.e. times cos Dec) and Dec.
    Axes {
        /// RA error column.
        ra: String,
        /// Dec error column.
        dec: String,
        /// Unit of both.
        unit: AngleUnit,
    },
    /// A circular error from one band's signal-to-noise ratio, the survey's PSF
    /// FWHM and a floor (FIELD notes §5.12, common practice):
    /// `σ = sqrt((0.600561 θ_FWHM / SNR)² + σ_floor²)`, through
    /// [`crate::crossmatch::position_error::centroid_sigma_arcsec`].
    SignalToNoise {
        /// Band id (one of the schema's bands) whose S/N is used.
        band: String,
        /// PSF FWHM θ, arcsec.
        fwhm_arcsec: f64,
        /// Per-axis systematic floor, arcsec (≥ 0).
        floor_arcsec: f64,
        /// Rows whose S/N in the band is unknown or below this are given the
        /// error at this S/N: a source in the catalog was found at least this far
        /// above its noise in some band.
        min_snr: f64,
    },
}

/// Default `min_snr` of a position error of kind `snr`: 3, the detection
/// threshold most surveys quote (common practice).
pub const DEFAULT_POSITION_MIN_SNR: f64 = 3.0;

/// How the size of an extended source is stated in its column.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SizeKind {
    /// A half-light (effective) radius.
    HalfLight,
    /// The FWHM of a Gaussian profile (half-light radius = FWHM / 2).
    GaussianFwhm,
    /// The scale length h of an exponential disc (half-light radius = 1.678347 h).
    ExponentialScale,
}

/// Extended sources: a size column and/or an extended flag, growing the
/// positional error by `σ_ext = c · r_half` in quadrature (FIELD notes §5.13,
/// common practice), through
/// [`crate::crossmatch::position_error::add_extent_arcsec`].
#[derive(Debug, Clone, PartialEq)]
pub struct Extended {
    /// Size column, its unit and what it measures.
    pub size: Option<(String, AngleUnit, SizeKind)>,
    /// Flag marking extended rows; with a size column only flagged rows use it.
    pub flag: Option<FlagTest>,
    /// Half-light radius, arcsec, given to extended rows without a size value.
    pub typical_arcsec: Option<f64>,
    /// `c` of `σ_ext = c · r_half`.
    pub coeff: f64,
}

impl Extended {
    /// The half-light radius in arcsec of a size value in the column's unit and kind.
    pub fn half_light_arcsec(unit: AngleUnit, kind: SizeKind, value: f64) -> f64 {
        use crate::crossmatch::position_error as pe;
        let arcsec = value * unit.to_arcsec();
        match kind {
            SizeKind::HalfLight => arcsec,
            SizeKind::GaussianFwhm => pe::half_light_from_gaussian_fwhm_arcsec(arcsec),
            SizeKind::ExponentialScale => pe::half_light_from_exponential_scale_arcsec(arcsec),
        }
    }
}

/// A test on a flag column of a row: text values (or one character of a
/// multi-band flag string), or bits of an integer column.
#[derive(Debug, Clone, PartialEq)]
pub enum FlagTest {
    /// The column (or its character at the 1-based `char_position`) is one of `values`.
    Text {
        /// Flag column.
        column: String,
        /// Values that pass the test.
        values: Vec<String>,
        /// 1-based character position inside a multi-band flag string.
        char_position: Option<usize>,
    },
    /// Bits of an integer column: any of the bits of `mask` set (all of them with `all`).
    Bits {
        /// Integer flag column.
        column: String,
        /// The bits tested (bit k is 2^k, counted from 0 at the least significant).
        mask: u64,
        /// True: every bit of `mask` must be set; false: any one is enough.
        all: bool,
    },
}

impl FlagTest {
    /// The column the test reads.
    pub fn column(&self) -> &str {
        match self {
            FlagTest::Text { column, .. } | FlagTest::Bits { column, .. } => column,
        }
    }

    /// A short readable form, e.g. `qual char 2 in [S]` or `flags bit 3 set`.
    pub fn describe(&self) -> String {
        match self {
            FlagTest::Text {
                column,
                values,
                char_position,
            } => match char_position {
                Some(p) => format!("{column} char {p} in [{}]", values.join(", ")),
                None => format!("{column} in [{}]", values.join(", ")),
            },
            FlagTest::Bits { column, mask, all } => describe_bits(column, *mask, *all),
        }
    }
}

/// `flags bit 3 set`, `flags has any of bits 0xc`, `flags has all of bits 0x5`.
fn describe_bits(column: &str, mask: u64, all: bool) -> String {
    if mask.is_power_of_two() {
        format!("{column} bit {} set", mask.trailing_zeros())
    } else if all {
        format!("{column} has all of bits {mask:#x}")
    } else {
        format!("{column} has any of bits {mask:#x}")
    }
}

/// Rows measured by forced photometry (at positions taken from elsewhere),
/// marked by a flag column.
#[derive(Debug, Clone, PartialEq)]
pub struct ForcedRows {
    /// The test that marks a row forced.
    pub test: FlagTest,
    /// S/N threshold: a forced row's value below it becomes an upper limit.
    pub below: f64,
    /// n of the limit max(F, 0) + n σ.
    pub n: f64,
}

/// Default S/N threshold of forced rows (`[forced] below`): 3 (FIELD notes §1.6,
/// "Treat S/N < 3 (or < 5, configurable) as non-detection"; common practice).
pub const DEFAULT_FORCED_BELOW: f64 = 3.0;
/// Default n of forced rows' limits max(F, 0) + n σ: 3 (common practice).
pub const DEFAULT_FORCED_N: f64 = 3.0;

/// What a magnitude band without an error column says about its errors.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NoErrorPolicy {
    /// Values are measurements whose errors are unknown (`no_error = "unknown"`).
    Unknown,
    /// Every value is an upper limit (`no_error = "limit"`).
    Limit,
}

/// A flag rule reading one character of a flag string, kept to check against
/// the data that the position exists.
#[derive(Debug, Clone, PartialEq)]
pub struct CharRule {
    /// Flag column.
    pub column: String,
    /// 1-based character position.
    pub position: usize,
    /// Schema line of the rule.
    pub line: usize,
}

/// The epoch of the positions.
#[derive(Debug, Clone, PartialEq)]
pub enum Epoch {
    /// One epoch for the whole catalog, in Julian years (e.g. 2015.5).
    Fixed(f64),
    /// A per-source epoch column.
    Column {
        /// Column name.
        column: String,
        /// What the column holds.
        unit: EpochUnit,
    },
}

/// The unit of an epoch column.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum EpochUnit {
    /// Julian year, e.g. 2010.53.
    Year,
    /// Modified Julian Date.
    Mjd,
    /// Julian Date.
    Jd,
}

/// Proper-motion columns, in mas/yr.
#[derive(Debug, Clone, PartialEq)]
pub struct ProperMotion {
    /// RA component column.
    pub ra: String,
    /// Dec component column.
    pub dec: String,
    /// True when the RA component is mu_alpha* = mu_alpha cos(dec) (the usual convention).
    pub ra_includes_cos_dec: bool,
    /// 1-sigma error columns of the two components (RA first, in the same
    /// convention as `ra`), mas/yr; they grow the positional error away from
    /// the catalog's epoch.
    pub errors: Option<(String, String)>,
}

/// How a band marks a measurement that is an upper limit or a non-detection.
#[derive(Debug, Clone, PartialEq)]
pub enum LimitMarker {
    /// A flag column: when it holds one of `values` (or, with `char`, when the
    /// character at that 1-based position does), the value column holds an upper limit.
    Flag {
        /// Flag column.
        column: String,
        /// Flag values meaning "upper limit".
        values: Vec<String>,
        /// 1-based character position inside a multi-band flag string.
        char_position: Option<usize>,
    },
    /// Bits of an integer flag column: when any (with `all`, every) bit of `mask`
    /// is set, the value column holds an upper limit.
    Bits {
        /// Integer flag column.
        column: String,
        /// The bits tested (bit k is 2^k, from 0).
        mask: u64,
        /// Every bit of `mask` must be set.
        all: bool,
    },
    /// Measurements with flux / error below `below` become upper limits by `rule`.
    SignalToNoise {
        /// S/N threshold.
        below: f64,
        /// How the limit is computed from the measurement.
        rule: LimitRule,
    },
    /// The value equals one of these sentinels when the source was not detected
    /// (no limit is given).
    Sentinel {
        /// Sentinel values.
        values: Vec<f64>,
    },
    /// A separate column holds the limit, used when the value column is empty.
    Column {
        /// The limit column, in the same unit as the value column.
        column: String,
    },
    /// A value given without an error is a limit (common in published tables).
    MissingError,
}

/// A rule that rejects a band's measurement (status "rejected").
#[derive(Debug, Clone, PartialEq)]
pub enum QualityRule {
    /// Reject when the column (or its character at `char_position`) is one of `values`.
    Reject {
        /// Flag column.
        column: String,
        /// Values that reject.
        values: Vec<String>,
        /// 1-based character position inside a multi-band flag string.
        char_position: Option<usize>,
    },
    /// Reject when any (with `all`, every) bit of `mask` is set in the integer column.
    Bits {
        /// Integer flag column.
        column: String,
        /// The bits tested (bit k is 2^k, from 0).
        mask: u64,
        /// Every bit of `mask` must be set.
        all: bool,
    },
    /// Reject when the numeric column is below `min` or above `max`.
    Range {
        /// Numeric column.
        column: String,
        /// Smallest accepted value.
        min: Option<f64>,
        /// Largest accepted value.
        max: Option<f64>,
    },
}

impl QualityRule {
    /// A short readable name used when counting rejections.
    pub fn describe(&self) -> String {
        match self {
            QualityRule::Reject { column, values, .. } => {
                format!("{column} in [{}]", values.join(", "))
            }
            QualityRule::Bits { column, mask, all } => describe_bits(column, *mask, *all),
            QualityRule::Range { column, min, max } => match (min, max) {
                (Some(lo), Some(hi)) => format!("{column} outside [{lo}, {hi}]"),
                (Some(lo), None) => format!("{column} below {lo}"),
                (None, Some(hi)) => format!("{column} above {hi}"),
                (None, None) => column.clone(),
            },
        }
    }

    /// The column the rule reads.
    pub fn column(&self) -> &str {
        match self {
            QualityRule::Reject { column, .. }
            | QualityRule::Bits { column, .. }
            | QualityRule::Range { column, .. } => column,
        }
    }
}

/// One band of a survey: where its measurements are and how to read them.
#[derive(Debug, Clone, PartialEq)]
pub struct BandColumns {
    /// The band from the library.
    pub band: Band,
    /// Value column.
    pub value: String,
    /// Unit of the value (and error) column.
    pub unit: ValueUnit,
    /// Error column (1 sigma, same unit as the value; magnitudes for magnitude units).
    pub error: Option<String>,
    /// Numeric values meaning "no measurement".
    pub nulls: Vec<f64>,
    /// Text values meaning "no measurement" (besides the empty string and NaN).
    pub null_text: Vec<String>,
    /// Magnitude offset added before conversion (e.g. a survey's published AB correction).
    pub offset_mag: f64,
    /// asinh softening b (dimensionless, in units of the zero-point flux).
    pub softening: Option<f64>,
    /// How upper limits are marked, if at all.
    pub limit: Option<LimitMarker>,
    /// Rules that reject a measurement.
    pub quality: Vec<QualityRule>,
    /// The survey's limiting depth in the value unit (used for "not detected" limits).
    pub depth: Option<f64>,
    /// The survey's stated limiting magnitude in the band's own system (Vega or
    /// AB, as in the band library), for the output metadata and the figures'
    /// detection-limit lines; it changes no value.
    pub depth_mag: Option<f64>,
    /// The signal-to-noise ratio at which `depth_mag` is stated (e.g. 5 for a
    /// 5σ limit), when the survey says.
    pub depth_snr: Option<f64>,
    /// A signal-to-noise column: S/N tests use it, and without an error column
    /// the error is derived from it (σ_m = 1.085736 / SNR for magnitudes,
    /// σ = |F| / SNR for flux densities; FIELD notes §1.4).
    pub snr: Option<String>,
    /// What a magnitude band without an error (or S/N) column says about errors.
    pub no_error: Option<NoErrorPolicy>,
    /// The rule for a flag-marked (or limit-column) limit that is ≤ 0 in flux
    /// density: by default max(F, 0) + 3σ when σ is known.
    pub limit_rule: Option<LimitRule>,
    /// Rows whose value is saturated: kept with status `saturated`, never a
    /// detection nor a limit.
    pub saturated: Option<FlagTest>,
    /// An empty value (empty, null, NaN or a null sentinel) is a non-detection
    /// (`empty = "not_detected"`) where the band covers.
    pub empty_not_detected: bool,
    /// The band's footprint when it is smaller than the catalog's (a MOC file);
    /// `None`: the band covers wherever the catalog has rows. Outside it the
    /// band's SED points are `not_covered`.
    pub coverage: Option<crate::sky::coverage::Coverage>,
    /// The band's own resolution (PSF FWHM), arcsec, overriding the catalog's
    /// (`resolution_arcsec` in the plan) for this band's blends.
    pub resolution_arcsec: Option<f64>,
    /// Schema line of this band's entry, for messages.
    pub line: usize,
}

impl BandColumns {
    /// True when the band has a zero point, i.e. its values become flux densities;
    /// otherwise only magnitudes (and colour indices) are kept.
    pub fn has_flux(&self) -> bool {
        !matches!(self.unit, ValueUnit::VegaMag) || self.band.zero_point_jy.is_some()
    }

    /// The conversion of this band's values to Jy; `None` for a magnitude-only band.
    pub fn conversion(&self) -> Option<Conversion> {
        self.has_flux().then(|| Conversion {
            unit: self.unit,
            // Vega and asinh magnitudes use the band zero point; AB magnitudes use
            // 3631 Jy by definition and flux units none. A band without a zero
            // point is read only as Vega magnitudes and has no conversion.
            zero_point_jy: self.band.zero_point_jy.unwrap_or(AB_ZERO_POINT_JY),
            offset_mag: self.offset_mag,
            softening: self.softening,
        })
    }

    /// A value in this band's unit expressed in the output unit: Jy, or (for a
    /// magnitude-only band) the magnitude with the offset applied.
    pub fn to_output(&self, value: f64) -> f64 {
        match self.conversion() {
            Some(c) => c.value_to_flux_jy(value),
            None => value + self.offset_mag,
        }
    }
}

/// A validated survey schema.
#[derive(Debug, Clone, PartialEq)]
pub struct SurveySchema {
    /// Catalog name used in outputs (`[a-z][a-z0-9_]*`).
    pub survey: String,
    /// Free-text description.
    pub description: Option<String>,
    /// File encoding.
    pub format: FileFormat,
    /// Identifier column; `None` numbers the rows.
    pub id: Option<String>,
    /// RA column.
    pub ra: String,
    /// Dec column.
    pub dec: String,
    /// How positions are written.
    pub position_format: PositionFormat,
    /// Positional uncertainty model.
    pub position_error: PositionError,
    /// Epoch of the positions.
    pub epoch: Epoch,
    /// Proper motions, if the catalog has them.
    pub proper_motion: Option<ProperMotion>,
    /// Extended sources, growing their positional errors.
    pub extended: Option<Extended>,
    /// Rows measured by forced photometry.
    pub forced: Option<ForcedRows>,
    /// The bands.
    pub bands: Vec<BandColumns>,
    /// Flag rules reading one character of a flag string, checked against the
    /// data ([`super::normalize::Normalizer::check_flag_positions`]).
    pub char_rules: Vec<CharRule>,
    /// The schema file.
    pub path: PathBuf,
    /// The schema text, kept for messages and output metadata.
    pub text: String,
}

impl SurveySchema {
    /// Reads and validates the schema at `path` against `library`.
    ///
    /// # Errors
    /// An [`Error::Toml`] when the file does not parse or has unknown keys, and an
    /// [`Error::Config`] naming the schema line when a value is impossible (an
    /// unknown band, unit or format, a band without a zero point where one is needed).
    pub fn from_file(path: &Path, library: &BandLibrary) -> Result<SurveySchema> {
        let text = read_toml_text(path)?;
        SurveySchema::from_str(&text, path, library)
    }

    /// Parses and validates schema `text`; `path` is used in messages only.
    ///
    /// # Errors
    /// As [`SurveySchema::from_file`].
    pub fn from_str(text: &str, path: &Path, library: &BandLibrary) -> Result<SurveySchema> {
        let raw: RawSchema = toml::from_str(text).map_err(|e| toml_error(path, text, &e))?;
        Validator {
            text,
            path,
            library,
        }
        .schema(raw)
    }

    /// Every column of the file the schema reads, with the schema line that names it.
    pub fn referenced_columns(&self) -> Vec<(String, usize)> {
        let mut cols: Vec<(String, usize)> = Vec::new();
        let mut add = |name: &str, line: usize| {
            if !cols.iter().any(|(c, _)| c == name) {
                cols.push((name.to_string(), line));
            }
        };
        let top = 0;
        if let Some(id) = &self.id {
            add(id, top);
        }
        add(&self.ra, top);
        add(&self.dec, top);
        match &self.position_error {
            PositionError::Fixed { .. } => {}
            PositionError::Circular { column, .. } => add(column, top),
            PositionError::Ellipse {
                major,
                minor,
                angle,
                ..
            } => {
                add(major, top);
                add(minor, top);
                add(angle, top);
            }
            PositionError::Axes { ra, dec, .. } => {
                add(ra, top);
                add(dec, top);
            }
            PositionError::SignalToNoise { .. } => {}
        }
        if let Some(ext) = &self.extended {
            if let Some((column, ..)) = &ext.size {
                add(column, top);
            }
            if let Some(flag) = &ext.flag {
                add(flag.column(), top);
            }
        }
        if let Epoch::Column { column, .. } = &self.epoch {
            add(column, top);
        }
        if let Some(pm) = &self.proper_motion {
            add(&pm.ra, top);
            add(&pm.dec, top);
            if let Some((ra, dec)) = &pm.errors {
                add(ra, top);
                add(dec, top);
            }
        }
        if let Some(forced) = &self.forced {
            add(forced.test.column(), top);
        }
        for band in &self.bands {
            add(&band.value, band.line);
            if let Some(err) = &band.error {
                add(err, band.line);
            }
            if let Some(snr) = &band.snr {
                add(snr, band.line);
            }
            match &band.limit {
                Some(LimitMarker::Flag { column, .. })
                | Some(LimitMarker::Bits { column, .. })
                | Some(LimitMarker::Column { column }) => add(column, band.line),
                _ => {}
            }
            if let Some(sat) = &band.saturated {
                add(sat.column(), band.line);
            }
            for rule in &band.quality {
                add(rule.column(), band.line);
            }
        }
        cols
    }

    /// The first line, at or after line `from`, of the schema that names `column`
    /// (e.g. `ra = "RAJ2000"`), or `from` when none does.
    pub fn line_of_column(&self, column: &str, from: usize) -> usize {
        let quoted = format!("\"{column}\"");
        self.text
            .lines()
            .enumerate()
            .skip(from.saturating_sub(1))
            .find(|(_, l)| l.contains(&quoted))
            .map(|(i, _)| i + 1)
            .unwrap_or(from)
    }

    /// The schema line where `key` is first set at the top of a line, or 0.
    pub fn line_of_key(&self, key: &str) -> usize {
        line_of_key(&self.text, key)
    }
}

/// The 1-based line of `text` where `key = ...` is first set, or 0.
pub fn line_of_key(text: &str, key: &str) -> usize {
    text.lines()
        .position(|l| {
            let t = l.trim_start();
            t.starts_with(key) && t[key.len()..].trim_start().starts_with('=')
        })
        .map(|i| i + 1)
        .unwrap_or(0)
}

// ---------------------------------------------------------------------------
// The TOML shape, as written by users.

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSchema {
    survey: Spanned<String>,
    description: Option<String>,
    format: Spanned<String>,
    id: Option<String>,
    csv: Option<RawCsv>,
    fits: Option<RawFits>,
    votable: Option<RawVotable>,
    position: Spanned<RawPosition>,
    epoch: Spanned<RawEpoch>,
    proper_motion: Option<Spanned<RawProperMotion>>,
    forced: Option<Spanned<RawForced>>,
    #[serde(default)]
    band: Vec<Spanned<RawBand>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawForced {
    column: String,
    values: Option<toml::Value>,
    char: Option<usize>,
    bit: Option<i64>,
    mask: Option<i64>,
    all: Option<bool>,
    below: Option<f64>,
    n: Option<f64>,
}

/// A flag test as written in a band's `saturated` or the position's `extended.flag`.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFlagTest {
    column: String,
    values: Option<toml::Value>,
    char: Option<usize>,
    bit: Option<i64>,
    mask: Option<i64>,
    all: Option<bool>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawExtended {
    size: Option<String>,
    unit: Option<String>,
    kind: Option<String>,
    flag: Option<Spanned<RawFlagTest>>,
    typical_arcsec: Option<f64>,
    coeff: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawCsv {
    delimiter: Option<Spanned<String>>,
    comment: Option<Spanned<String>>,
    quote: Option<Spanned<String>>,
    header: Option<bool>,
    gzip: Option<bool>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFits {
    hdu: Option<usize>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawVotable {
    table: Option<usize>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPosition {
    ra: String,
    dec: String,
    format: Option<Spanned<String>>,
    error: Spanned<RawPositionError>,
    extended: Option<Spanned<RawExtended>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPositionError {
    kind: String,
    arcsec: Option<f64>,
    column: Option<String>,
    major: Option<String>,
    minor: Option<String>,
    angle: Option<String>,
    ra: Option<String>,
    dec: Option<String>,
    unit: Option<String>,
    band: Option<String>,
    fwhm_arcsec: Option<f64>,
    floor_arcsec: Option<f64>,
    min_snr: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawEpoch {
    year: Option<Spanned<f64>>,
    column: Option<String>,
    unit: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawProperMotion {
    ra: String,
    dec: String,
    ra_includes_cos_dec: Option<bool>,
    unit: Option<String>,
    ra_error: Option<String>,
    dec_error: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawBand {
    band: Spanned<String>,
    value: String,
    unit: Spanned<String>,
    error: Option<String>,
    #[serde(default)]
    nulls: Vec<f64>,
    #[serde(default)]
    null_text: Vec<String>,
    offset_mag: Option<Spanned<f64>>,
    softening: Option<Spanned<f64>>,
    limit: Option<Spanned<RawLimit>>,
    #[serde(default)]
    quality: Vec<Spanned<RawQuality>>,
    depth: Option<Spanned<f64>>,
    depth_mag: Option<Spanned<f64>>,
    depth_snr: Option<Spanned<f64>>,
    snr: Option<String>,
    no_error: Option<Spanned<String>>,
    saturated: Option<Spanned<RawFlagTest>>,
    empty: Option<Spanned<String>>,
    coverage: Option<Spanned<String>>,
    resolution_arcsec: Option<Spanned<f64>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLimit {
    kind: String,
    column: Option<String>,
    values: Option<toml::Value>,
    char: Option<usize>,
    bit: Option<i64>,
    mask: Option<i64>,
    all: Option<bool>,
    below: Option<f64>,
    rule: Option<String>,
    n: Option<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawQuality {
    column: String,
    reject: Option<Vec<toml::Value>>,
    char: Option<usize>,
    bit: Option<i64>,
    mask: Option<i64>,
    all: Option<bool>,
    min: Option<f64>,
    max: Option<f64>,
}

// ---------------------------------------------------------------------------
// Validation: raw TOML values into a SurveySchema, with schema lines in errors.

struct Validator<'a> {
    text: &'a str,
    path: &'a Path,
    library: &'a BandLibrary,
}

impl Validator<'_> {
    fn line(&self, span: std::ops::Range<usize>) -> usize {
        line_of_offset(self.text, span.start)
    }

    fn err(&self, span: std::ops::Range<usize>, message: impl Into<String>) -> Error {
        Error::config(self.path, self.line(span), message)
    }

    fn schema(&self, raw: RawSchema) -> Result<SurveySchema> {
        let survey = raw.survey.get_ref().clone();
        if !is_identifier(&survey) {
            return Err(self.err(
                raw.survey.span(),
                format!(
                    "survey name \"{survey}\" must be lowercase letters, digits and '_', starting with a letter"
                ),
            ));
        }
        let format = self.format(&raw)?;
        let position = raw.position.get_ref();
        let position_format = match position.format.as_ref().map(|f| f.get_ref().as_str()) {
            None | Some("degrees") => PositionFormat::Degrees,
            Some("sexagesimal") => PositionFormat::Sexagesimal,
            Some(other) => {
                return Err(self.err(
                    position.format.as_ref().map(|f| f.span()).unwrap_or(raw.position.span()),
                    format!("position format \"{other}\" is unknown; expected \"degrees\" or \"sexagesimal\""),
                ));
            }
        };
        let mut char_rules: Vec<CharRule> = Vec::new();
        let position_error = self.position_error(&position.error)?;
        let extended = match &position.extended {
            None => None,
            Some(e) => Some(self.extended(e, &mut char_rules)?),
        };
        let forced = match &raw.forced {
            None => None,
            Some(f) => Some(self.forced(f, &mut char_rules)?),
        };
        let epoch = self.epoch(&raw.epoch)?;
        let proper_motion = match &raw.proper_motion {
            None => None,
            Some(pm) => {
                let inner = pm.get_ref();
                if let Some(unit) = &inner.unit
                    && unit != "mas/yr"
                {
                    return Err(self.err(
                        pm.span(),
                        format!("proper-motion unit \"{unit}\" is unknown; expected \"mas/yr\""),
                    ));
                }
                let Some(cos) = inner.ra_includes_cos_dec else {
                    return Err(self.err(
                        pm.span(),
                        "proper_motion needs ra_includes_cos_dec = true or false: catalogs differ, and guessing moves stars by up to 1/cos(dec)",
                    ));
                };
                let errors = match (&inner.ra_error, &inner.dec_error) {
                    (Some(ra), Some(dec)) => Some((ra.clone(), dec.clone())),
                    (None, None) => None,
                    (Some(_), None) | (None, Some(_)) => {
                        return Err(self.err(
                            pm.span(),
                            "proper_motion ra_error and dec_error go together: give both error columns (mas/yr) or neither",
                        ));
                    }
                };
                Some(ProperMotion {
                    ra: inner.ra.clone(),
                    dec: inner.dec.clone(),
                    ra_includes_cos_dec: cos,
                    errors,
                })
            }
        };
        let mut bands: Vec<BandColumns> = Vec::with_capacity(raw.band.len());
        for raw_band in &raw.band {
            let band = self.band(raw_band, &mut char_rules)?;
            if bands.iter().any(|b| b.band.id == band.band.id) {
                return Err(self.err(
                    raw_band.get_ref().band.span(),
                    format!("band \"{}\" is listed twice", band.band.id),
                ));
            }
            bands.push(band);
        }
        if bands.is_empty() {
            return Err(Error::config(
                self.path,
                0,
                "the schema lists no [[band]]; a survey schema needs at least one band",
            ));
        }
        if let PositionError::SignalToNoise { band, .. } = &position_error {
            let span = position.error.span();
            match bands.iter().find(|b| &b.band.id == band) {
                None => {
                    return Err(self.err(
                        span,
                        format!(
                            "position error of kind \"snr\" names band \"{band}\", which is not a band of this schema (it has: {})",
                            bands.iter().map(|b| b.band.id.as_str()).collect::<Vec<_>>().join(", ")
                        ),
                    ));
                }
                Some(b) if b.error.is_none() && b.snr.is_none() => {
                    return Err(self.err(
                        span,
                        format!(
                            "position error of kind \"snr\" needs the signal-to-noise of band \"{band}\", which has neither an error nor an snr column"
                        ),
                    ));
                }
                Some(_) => {}
            }
        }
        Ok(SurveySchema {
            survey,
            description: raw.description,
            format,
            id: raw.id,
            ra: position.ra.clone(),
            dec: position.dec.clone(),
            position_format,
            position_error,
            epoch,
            proper_motion,
            extended,
            forced,
            bands,
            char_rules,
            path: self.path.to_path_buf(),
            text: self.text.to_string(),
        })
    }

    fn format(&self, raw: &RawSchema) -> Result<FileFormat> {
        let single_byte = |s: &Spanned<String>, what: &str| -> Result<u8> {
            let v = s.get_ref();
            let v = if v == "\\t" { "\t" } else { v.as_str() };
            if v.len() == 1 {
                Ok(v.as_bytes()[0])
            } else {
                Err(self.err(
                    s.span(),
                    format!("{what} must be a single character, found \"{v}\""),
                ))
            }
        };
        match raw.format.get_ref().as_str() {
            fmt @ ("csv" | "tsv") => {
                let mut options = CsvOptions::default();
                if fmt == "tsv" {
                    options.delimiter = b'\t';
                }
                if let Some(csv) = &raw.csv {
                    if let Some(d) = &csv.delimiter {
                        options.delimiter = single_byte(d, "csv.delimiter")?;
                    }
                    if let Some(c) = &csv.comment {
                        options.comment = if c.get_ref().is_empty() {
                            None
                        } else {
                            Some(single_byte(c, "csv.comment")?)
                        };
                    }
                    if let Some(q) = &csv.quote {
                        options.quote = single_byte(q, "csv.quote")?;
                    }
                    if let Some(h) = csv.header {
                        options.header = h;
                    }
                    options.gzip = csv.gzip;
                }
                if !options.header {
                    return Err(self.err(
                        raw.format.span(),
                        "csv.header = false is not supported: the schema names columns, so the file needs a header line",
                    ));
                }
                Ok(FileFormat::Csv(options))
            }
            "parquet" => Ok(FileFormat::Parquet),
            "fits" => Ok(FileFormat::Fits {
                hdu: raw.fits.as_ref().and_then(|f| f.hdu),
            }),
            "votable" => Ok(FileFormat::Votable {
                table: raw.votable.as_ref().and_then(|v| v.table).unwrap_or(0),
            }),
            other => Err(self.err(
                raw.format.span(),
                format!(
                    "format \"{other}\" is unknown; expected one of csv, tsv, parquet, fits, votable"
                ),
            )),
        }
    }

    fn angle_unit(&self, unit: Option<&str>, span: std::ops::Range<usize>) -> Result<AngleUnit> {
        match unit {
            None | Some("arcsec") => Ok(AngleUnit::Arcsec),
            Some("mas") => Ok(AngleUnit::Mas),
            Some("deg") => Ok(AngleUnit::Deg),
            Some(other) => Err(self.err(
                span,
                format!("angle unit \"{other}\" is unknown; expected arcsec, mas or deg"),
            )),
        }
    }

    fn position_error(&self, raw: &Spanned<RawPositionError>) -> Result<PositionError> {
        let span = raw.span();
        let e = raw.get_ref();
        let need = |v: &Option<String>, key: &str| -> Result<String> {
            v.clone().ok_or_else(|| {
                self.err(
                    span.clone(),
                    format!("position error of kind \"{}\" needs \"{key}\"", e.kind),
                )
            })
        };
        let unit = self.angle_unit(e.unit.as_deref(), span.clone())?;
        match e.kind.as_str() {
            "fixed" => match e.arcsec {
                Some(s) if s > 0.0 && s <= MAX_POSITION_ERROR_ARCSEC => {
                    Ok(PositionError::Fixed { sigma_arcsec: s })
                }
                Some(s) => Err(self.err(
                    span,
                    format!(
                        "a fixed position error must be a number of arcsec in (0, {MAX_POSITION_ERROR_ARCSEC}], found {s}"
                    ),
                )),
                None => Err(self.err(span, "position error of kind \"fixed\" needs \"arcsec\"")),
            },
            "circular" => Ok(PositionError::Circular {
                column: need(&e.column, "column")?,
                unit,
            }),
            "ellipse" => Ok(PositionError::Ellipse {
                major: need(&e.major, "major")?,
                minor: need(&e.minor, "minor")?,
                angle: need(&e.angle, "angle")?,
                unit,
            }),
            "axes" => Ok(PositionError::Axes {
                ra: need(&e.ra, "ra")?,
                dec: need(&e.dec, "dec")?,
                unit,
            }),
            "snr" => {
                let band = need(&e.band, "band")?;
                let Some(fwhm) = e.fwhm_arcsec else {
                    return Err(self.err(
                        span,
                        "position error of kind \"snr\" needs \"fwhm_arcsec\" (the survey's PSF FWHM)",
                    ));
                };
                if !(fwhm > 0.0 && fwhm <= MAX_POSITION_ERROR_ARCSEC) {
                    return Err(self.err(
                        span,
                        format!(
                            "fwhm_arcsec must be a number of arcsec in (0, {MAX_POSITION_ERROR_ARCSEC}], found {fwhm}"
                        ),
                    ));
                }
                let floor = e.floor_arcsec.unwrap_or(0.0);
                if !(0.0..=MAX_POSITION_ERROR_ARCSEC).contains(&floor) {
                    return Err(self.err(
                        span,
                        format!(
                            "floor_arcsec must be a number of arcsec in [0, {MAX_POSITION_ERROR_ARCSEC}], found {floor}"
                        ),
                    ));
                }
                let min_snr = e.min_snr.unwrap_or(DEFAULT_POSITION_MIN_SNR);
                if !(min_snr > 0.0 && min_snr <= MAX_SIGMA_MULTIPLE) {
                    return Err(self.err(
                        span,
                        format!("min_snr must lie in (0, {MAX_SIGMA_MULTIPLE}], found {min_snr}"),
                    ));
                }
                Ok(PositionError::SignalToNoise {
                    band,
                    fwhm_arcsec: fwhm,
                    floor_arcsec: floor,
                    min_snr,
                })
            }
            other => Err(self.err(
                span,
                format!(
                    "position error kind \"{other}\" is unknown; expected fixed, circular, ellipse, axes or snr"
                ),
            )),
        }
    }

    fn epoch(&self, raw: &Spanned<RawEpoch>) -> Result<Epoch> {
        let e = raw.get_ref();
        match (&e.year, &e.column) {
            (Some(year), None) => {
                let v = *year.get_ref();
                if !EPOCH_RANGE_YR.contains(&v) {
                    return Err(self.err(
                        year.span(),
                        format!(
                            "epoch year {v} is outside 1800 to 2200; expected a Julian year such as 2015.5 (per-source MJD or JD go in a column with unit = \"mjd\" or \"jd\")"
                        ),
                    ));
                }
                Ok(Epoch::Fixed(v))
            }
            (None, Some(column)) => {
                let unit = match e.unit.as_deref() {
                    None | Some("year") => EpochUnit::Year,
                    Some("mjd") => EpochUnit::Mjd,
                    Some("jd") => EpochUnit::Jd,
                    Some(other) => {
                        return Err(self.err(
                            raw.span(),
                            format!("epoch unit \"{other}\" is unknown; expected year, mjd or jd"),
                        ));
                    }
                };
                Ok(Epoch::Column {
                    column: column.clone(),
                    unit,
                })
            }
            _ => Err(self.err(
                raw.span(),
                "[epoch] needs exactly one of \"year\" (one epoch for all) or \"column\" (per source)",
            )),
        }
    }

    /// The mask of `bit = k` or `mask = m`; `None` when neither is given.
    fn mask(
        &self,
        bit: Option<i64>,
        mask: Option<i64>,
        span: std::ops::Range<usize>,
    ) -> Result<Option<u64>> {
        match (bit, mask) {
            (None, None) => Ok(None),
            (Some(_), Some(_)) => Err(self.err(
                span,
                "a bit test takes either bit = k (one bit) or mask = m (several), not both",
            )),
            (Some(b), None) => match u32::try_from(b) {
                Ok(b) if b <= 63 => Ok(Some(1u64 << b)),
                _ => Err(self.err(
                    span,
                    format!(
                        "bit must be a bit number in [0, 63] (0 is the least significant), found {b}"
                    ),
                )),
            },
            (None, Some(m)) if m > 0 => Ok(Some(m as u64)),
            (None, Some(m)) => Err(self.err(
                span,
                format!("mask must be a positive integer such as 0x0c, found {m}"),
            )),
        }
    }

    /// A flag test from the shared keys: `values` (and `char`) for text,
    /// `bit` or `mask` (and `all`) for bits of an integer column.
    #[allow(clippy::too_many_arguments)]
    fn flag_test(
        &self,
        column: &str,
        values: Option<&toml::Value>,
        char_position: Option<usize>,
        bit: Option<i64>,
        mask: Option<i64>,
        all: Option<bool>,
        span: std::ops::Range<usize>,
        char_rules: &mut Vec<CharRule>,
    ) -> Result<FlagTest> {
        if char_position == Some(0) {
            return Err(self.err(span, "char counts from 1"));
        }
        match self.mask(bit, mask, span.clone())? {
            Some(mask) => {
                if values.is_some() || char_position.is_some() {
                    return Err(self.err(
                        span,
                        "a bit test (bit or mask) reads an integer column; it takes no values or char",
                    ));
                }
                Ok(FlagTest::Bits {
                    column: column.to_string(),
                    mask,
                    all: all.unwrap_or(false),
                })
            }
            None => {
                if all.is_some() {
                    return Err(self.err(span, "all applies only to a bit test (mask)"));
                }
                let values = self.text_values(values, span.clone(), "values")?;
                if let Some(position) = char_position {
                    char_rules.push(CharRule {
                        column: column.to_string(),
                        position,
                        line: self.line(span),
                    });
                }
                Ok(FlagTest::Text {
                    column: column.to_string(),
                    values,
                    char_position,
                })
            }
        }
    }

    fn forced(
        &self,
        raw: &Spanned<RawForced>,
        char_rules: &mut Vec<CharRule>,
    ) -> Result<ForcedRows> {
        let f = raw.get_ref();
        let span = raw.span();
        let test = self.flag_test(
            &f.column,
            f.values.as_ref(),
            f.char,
            f.bit,
            f.mask,
            f.all,
            span.clone(),
            char_rules,
        )?;
        let below = f.below.unwrap_or(DEFAULT_FORCED_BELOW);
        let n = f.n.unwrap_or(DEFAULT_FORCED_N);
        for (key, v) in [("below", below), ("n", n)] {
            if !(v > 0.0 && v <= MAX_SIGMA_MULTIPLE) {
                return Err(self.err(
                    span,
                    format!("forced \"{key}\" must lie in (0, {MAX_SIGMA_MULTIPLE}], found {v}"),
                ));
            }
        }
        Ok(ForcedRows { test, below, n })
    }

    fn extended(
        &self,
        raw: &Spanned<RawExtended>,
        char_rules: &mut Vec<CharRule>,
    ) -> Result<Extended> {
        let e = raw.get_ref();
        let span = raw.span();
        let size = match &e.size {
            None => {
                if e.unit.is_some() || e.kind.is_some() {
                    return Err(self.err(
                        span,
                        "extended unit and kind describe the size column; give size = \"column\" too",
                    ));
                }
                None
            }
            Some(column) => {
                let unit = self.angle_unit(e.unit.as_deref(), span.clone())?;
                let kind = match e.kind.as_deref() {
                    None | Some("half_light") => SizeKind::HalfLight,
                    Some("gaussian_fwhm") => SizeKind::GaussianFwhm,
                    Some("exponential_scale") => SizeKind::ExponentialScale,
                    Some(other) => {
                        return Err(self.err(
                            span,
                            format!(
                                "extended size kind \"{other}\" is unknown; expected half_light, gaussian_fwhm or exponential_scale"
                            ),
                        ));
                    }
                };
                Some((column.clone(), unit, kind))
            }
        };
        let flag = match &e.flag {
            None => None,
            Some(f) => {
                let t = f.get_ref();
                Some(self.flag_test(
                    &t.column,
                    t.values.as_ref(),
                    t.char,
                    t.bit,
                    t.mask,
                    t.all,
                    f.span(),
                    char_rules,
                )?)
            }
        };
        if size.is_none() && flag.is_none() {
            return Err(self.err(
                span,
                "extended needs size = \"column\" (a size per source), flag = { ... } (which rows are extended), or both",
            ));
        }
        if let Some(t) = e.typical_arcsec
            && !(t > 0.0 && t <= MAX_POSITION_ERROR_ARCSEC)
        {
            return Err(self.err(
                span,
                format!(
                    "typical_arcsec must be a half-light radius in arcsec in (0, {MAX_POSITION_ERROR_ARCSEC}], found {t}"
                ),
            ));
        }
        match (&flag, e.typical_arcsec) {
            (None, Some(_)) => {
                return Err(self.err(
                    span,
                    "typical_arcsec is the size of flagged rows without a size value; give flag = { ... } too",
                ));
            }
            (Some(_), None) if size.is_none() => {
                return Err(self.err(
                    span,
                    "an extended flag without a size column needs typical_arcsec (the survey's typical half-light radius)",
                ));
            }
            _ => {}
        }
        let coeff = e
            .coeff
            .unwrap_or(crate::crossmatch::position_error::EXTENDED_COEFF);
        if !(coeff > 0.0 && coeff <= 1.0) {
            return Err(self.err(
                span,
                format!("extended coeff must lie in (0, 1] (sigma_ext = coeff x half-light radius), found {coeff}"),
            ));
        }
        Ok(Extended {
            size,
            flag,
            typical_arcsec: e.typical_arcsec,
            coeff,
        })
    }

    fn band(&self, raw: &Spanned<RawBand>, char_rules: &mut Vec<CharRule>) -> Result<BandColumns> {
        let b = raw.get_ref();
        let id = b.band.get_ref();
        let Some(band) = self.library.get(id) else {
            return Err(self.err(
                b.band.span(),
                format!(
                    "band \"{id}\" is not in the band library; add it to a band file given with --bands, or use one of: {}",
                    nearby_ids(self.library, id)
                ),
            ));
        };
        let Some(unit) = ValueUnit::parse(b.unit.get_ref()) else {
            return Err(self.err(
                b.unit.span(),
                format!(
                    "unit \"{}\" is unknown; expected one of {}",
                    b.unit.get_ref(),
                    ValueUnit::spellings().join(", ")
                ),
            ));
        };
        if matches!(unit, ValueUnit::VegaMag) && band.zero_point_jy.is_none() {
            // Magnitude-only band: allowed, kept as magnitudes for colour indices.
        }
        if !matches!(unit, ValueUnit::VegaMag) && band.zero_point_jy.is_none() {
            return Err(self.err(
                b.unit.span(),
                format!(
                    "band \"{id}\" has no zero point in the band library, so only Vega magnitudes can be read for it (found unit \"{}\")",
                    b.unit.get_ref()
                ),
            ));
        }
        if matches!(unit, ValueUnit::VegaMag) && band.system == crate::photometry::PhotSystem::Ab {
            return Err(self.err(
                b.unit.span(),
                format!("band \"{id}\" is an AB band; its magnitudes have unit \"ab_mag\", not \"vega_mag\""),
            ));
        }
        let softening = match (&unit, &b.softening) {
            (ValueUnit::AsinhMag, Some(s)) if *s.get_ref() > 0.0 && *s.get_ref() <= 1.0 => {
                Some(*s.get_ref())
            }
            (ValueUnit::AsinhMag, Some(s)) => {
                return Err(self.err(
                    s.span(),
                    format!(
                        "asinh softening must lie in (0, 1] (a fraction of the zero-point flux), found {}",
                        s.get_ref()
                    ),
                ));
            }
            (ValueUnit::AsinhMag, None) => match band.asinh_softening {
                Some(s) => Some(s),
                None => {
                    return Err(self.err(
                        b.unit.span(),
                        format!(
                            "asinh magnitudes need a softening: band \"{id}\" has none in the library; set softening = <b> in this band"
                        ),
                    ));
                }
            },
            (_, Some(s)) => {
                return Err(self.err(s.span(), "softening applies only to unit \"asinh_mag\""));
            }
            (_, None) => None,
        };
        let (limit, limit_rule) = match &b.limit {
            None => (None, None),
            Some(l) => {
                let (marker, rule) = self.limit(l, char_rules)?;
                (Some(marker), rule)
            }
        };
        if matches!(limit, Some(LimitMarker::MissingError)) && b.error.is_none() {
            return Err(self.err(
                raw.span(),
                "limit kind \"missing_error\" needs an error column: a value without an error is the limit",
            ));
        }
        if matches!(limit, Some(LimitMarker::SignalToNoise { .. }))
            && b.error.is_none()
            && b.snr.is_none()
        {
            return Err(self.err(
                raw.span(),
                "limit kind \"snr\" needs an error column to compute the signal-to-noise ratio (or an snr column)",
            ));
        }
        let no_error = match &b.no_error {
            None => None,
            Some(p) => {
                if b.error.is_some() || b.snr.is_some() {
                    return Err(self.err(
                        p.span(),
                        "no_error says what a band without an error column means; this band has an error or snr column",
                    ));
                }
                match p.get_ref().as_str() {
                    "unknown" => Some(NoErrorPolicy::Unknown),
                    "limit" => Some(NoErrorPolicy::Limit),
                    other => {
                        return Err(self.err(
                            p.span(),
                            format!(
                                "no_error \"{other}\" is unknown; expected \"unknown\" (measurements whose errors are unknown) or \"limit\" (every value is an upper limit)"
                            ),
                        ));
                    }
                }
            }
        };
        if unit.is_magnitude() && b.error.is_none() && b.snr.is_none() && no_error.is_none() {
            return Err(self.err(
                raw.span(),
                format!(
                    "band \"{id}\" gives magnitudes without an error column; name it with error = \"...\", give the signal-to-noise with snr = \"...\", or say what the values are with no_error = \"unknown\" (measurements whose errors are unknown) or no_error = \"limit\" (every value is an upper limit)"
                ),
            ));
        }
        let saturated = match &b.saturated {
            None => None,
            Some(t) => {
                let f = t.get_ref();
                Some(self.flag_test(
                    &f.column,
                    f.values.as_ref(),
                    f.char,
                    f.bit,
                    f.mask,
                    f.all,
                    t.span(),
                    char_rules,
                )?)
            }
        };
        let empty_not_detected = match &b.empty {
            None => false,
            Some(e) => match e.get_ref().as_str() {
                "missing" => false,
                "not_detected" => true,
                other => {
                    return Err(self.err(
                        e.span(),
                        format!(
                            "empty \"{other}\" is unknown; expected \"not_detected\" (an empty value is a non-detection where the band covers) or \"missing\" (the default)"
                        ),
                    ));
                }
            },
        };
        let coverage = match &b.coverage {
            None => None,
            Some(c) => {
                if !empty_not_detected {
                    return Err(self.err(
                        c.span(),
                        "coverage is the band's footprint for empty = \"not_detected\"; set that too",
                    ));
                }
                let file = self
                    .path
                    .parent()
                    .unwrap_or(Path::new(""))
                    .join(c.get_ref());
                let coverage = crate::sky::coverage::Coverage::from_moc_file(&file)
                    .map_err(|e| self.err(c.span(), format!("band coverage: {e}")))?;
                Some(coverage)
            }
        };
        let resolution_arcsec = match &b.resolution_arcsec {
            None => None,
            Some(r) => {
                let v = *r.get_ref();
                if !(v > 0.0 && v <= MAX_POSITION_ERROR_ARCSEC) {
                    return Err(self.err(
                        r.span(),
                        format!(
                            "resolution_arcsec must be a PSF FWHM in (0, {MAX_POSITION_ERROR_ARCSEC}] arcsec, found {v}"
                        ),
                    ));
                }
                Some(v)
            }
        };
        let mut quality = Vec::with_capacity(b.quality.len());
        for q in &b.quality {
            quality.push(self.quality(q, char_rules)?);
        }
        if let Some(v) = b.nulls.iter().find(|v| v.is_nan()) {
            return Err(self.err(
                raw.span(),
                format!("nulls holds {v}; NaN is always read as no measurement, list only numbers"),
            ));
        }
        let offset_mag = match &b.offset_mag {
            None => 0.0,
            Some(o) => {
                let v = *o.get_ref();
                if !(-MAX_OFFSET_MAG..=MAX_OFFSET_MAG).contains(&v) {
                    return Err(self.err(
                        o.span(),
                        format!(
                            "offset_mag must be a number of magnitudes in [-{MAX_OFFSET_MAG}, {MAX_OFFSET_MAG}], found {v}"
                        ),
                    ));
                }
                v
            }
        };
        let mut columns = BandColumns {
            band: band.clone(),
            value: b.value.clone(),
            unit,
            error: b.error.clone(),
            nulls: b.nulls.clone(),
            null_text: b.null_text.clone(),
            offset_mag,
            softening,
            limit,
            quality,
            depth: None,
            depth_mag: None,
            depth_snr: None,
            snr: b.snr.clone(),
            no_error,
            limit_rule,
            saturated,
            empty_not_detected,
            coverage,
            resolution_arcsec,
            line: self.line(raw.span()),
        };
        if let Some(d) = &b.depth_mag {
            let v = *d.get_ref();
            if !DEPTH_MAG_RANGE.contains(&v) {
                return Err(self.err(
                    d.span(),
                    format!(
                        "depth_mag must be a magnitude in [{}, {}] (the survey's limit in the band's own system), found {v}",
                        DEPTH_MAG_RANGE.start(),
                        DEPTH_MAG_RANGE.end()
                    ),
                ));
            }
            columns.depth_mag = Some(v);
        }
        if let Some(n) = &b.depth_snr {
            let v = *n.get_ref();
            if columns.depth_mag.is_none() {
                return Err(self.err(
                    n.span(),
                    "depth_snr is the signal-to-noise ratio of depth_mag; give depth_mag too",
                ));
            }
            if !(v > 0.0 && v <= MAX_SIGMA_MULTIPLE) {
                return Err(self.err(
                    n.span(),
                    format!("depth_snr must lie in (0, {MAX_SIGMA_MULTIPLE}], found {v}"),
                ));
            }
            columns.depth_snr = Some(v);
        }
        if let Some(d) = &b.depth {
            let v = *d.get_ref();
            let out = if v.is_finite() {
                columns.to_output(v)
            } else {
                v
            };
            let usable = if columns.has_flux() {
                out.is_finite() && out > 0.0
            } else {
                out.is_finite()
            };
            if !usable {
                return Err(self.err(
                    d.span(),
                    format!(
                        "depth {v} (unit {}) does not give a finite, positive flux density; expected a limiting value such as 21.5 for magnitudes or 0.05 for mJy",
                        unit.as_str()
                    ),
                ));
            }
            columns.depth = Some(v);
        }
        Ok(columns)
    }

    /// The limit marker, and the schema's own rule for a marked limit ≤ 0
    /// (`rule` / `n` on kinds flag, column and missing_error).
    fn limit(
        &self,
        raw: &Spanned<RawLimit>,
        char_rules: &mut Vec<CharRule>,
    ) -> Result<(LimitMarker, Option<LimitRule>)> {
        let l = raw.get_ref();
        let span = raw.span();
        let marker = self.limit_marker(raw, char_rules)?;
        let own_rule = match &marker {
            LimitMarker::SignalToNoise { .. } => None,
            LimitMarker::Sentinel { .. } => {
                if l.rule.is_some() || l.n.is_some() {
                    return Err(self.err(
                        span,
                        "limit kind \"sentinel\" gives no value to bound; rule and n do not apply",
                    ));
                }
                None
            }
            _ if l.rule.is_none() && l.n.is_none() => None,
            _ => Some(self.limit_rule(l, span.clone())?),
        };
        Ok((marker, own_rule))
    }

    fn limit_rule(&self, l: &RawLimit, span: std::ops::Range<usize>) -> Result<LimitRule> {
        let n = l.n.unwrap_or(3.0);
        if !(n > 0.0 && n <= MAX_SIGMA_MULTIPLE) {
            return Err(self.err(
                span,
                format!("limit \"n\" must lie in (0, {MAX_SIGMA_MULTIPLE}], found {n}"),
            ));
        }
        match l.rule.as_deref() {
            None | Some("flux_plus_sigma") => Ok(LimitRule::FluxPlusSigma { n }),
            Some("sigma") => Ok(LimitRule::SigmaMultiple { n }),
            Some(other) => Err(self.err(
                span,
                format!(
                    "limit rule \"{other}\" is unknown; expected \"sigma\" (n x sigma) or \"flux_plus_sigma\" (max(flux, 0) + n x sigma)"
                ),
            )),
        }
    }

    fn limit_marker(
        &self,
        raw: &Spanned<RawLimit>,
        char_rules: &mut Vec<CharRule>,
    ) -> Result<LimitMarker> {
        let l = raw.get_ref();
        let span = raw.span();
        let need_column = || {
            l.column.clone().ok_or_else(|| {
                self.err(
                    span.clone(),
                    format!("limit kind \"{}\" needs \"column\"", l.kind),
                )
            })
        };
        match l.kind.as_str() {
            "flag" => {
                let column = need_column()?;
                match self.flag_test(
                    &column,
                    l.values.as_ref(),
                    l.char,
                    l.bit,
                    l.mask,
                    l.all,
                    span,
                    char_rules,
                )? {
                    FlagTest::Text {
                        column,
                        values,
                        char_position,
                    } => Ok(LimitMarker::Flag {
                        column,
                        values,
                        char_position,
                    }),
                    FlagTest::Bits { column, mask, all } => {
                        Ok(LimitMarker::Bits { column, mask, all })
                    }
                }
            }
            "snr" => {
                let below = l.below.unwrap_or(3.0);
                let n = l.n.unwrap_or(3.0);
                for (key, v) in [("below", below), ("n", n)] {
                    if !(v > 0.0 && v <= MAX_SIGMA_MULTIPLE) {
                        return Err(self.err(
                            span,
                            format!(
                                "snr limit \"{key}\" must lie in (0, {MAX_SIGMA_MULTIPLE}], found {v}"
                            ),
                        ));
                    }
                }
                let rule = match l.rule.as_deref() {
                    None | Some("flux_plus_sigma") => LimitRule::FluxPlusSigma { n },
                    Some("sigma") => LimitRule::SigmaMultiple { n },
                    Some(other) => {
                        return Err(self.err(
                            span,
                            format!(
                                "limit rule \"{other}\" is unknown; expected \"sigma\" (n x sigma) or \"flux_plus_sigma\" (max(flux, 0) + n x sigma)"
                            ),
                        ));
                    }
                };
                Ok(LimitMarker::SignalToNoise { below, rule })
            }
            "sentinel" => {
                let values = match &l.values {
                    Some(toml::Value::Array(items)) => items
                        .iter()
                        .map(|v| match v {
                            toml::Value::Float(f) => Some(*f),
                            toml::Value::Integer(i) => Some(*i as f64),
                            _ => None,
                        })
                        .collect::<Option<Vec<f64>>>(),
                    _ => None,
                };
                match values {
                    Some(v) if v.iter().any(|x| x.is_nan()) => Err(self.err(
                        span,
                        "limit kind \"sentinel\" values must be numbers, found nan (NaN is always read as no measurement)",
                    )),
                    Some(v) if !v.is_empty() => Ok(LimitMarker::Sentinel { values: v }),
                    _ => Err(self.err(
                        span,
                        "limit kind \"sentinel\" needs values = [numbers], e.g. [99.0]",
                    )),
                }
            }
            "column" => Ok(LimitMarker::Column {
                column: need_column()?,
            }),
            "missing_error" => Ok(LimitMarker::MissingError),
            other => Err(self.err(
                span,
                format!(
                    "limit kind \"{other}\" is unknown; expected flag, snr, sentinel, column or missing_error"
                ),
            )),
        }
    }

    fn text_values(
        &self,
        values: Option<&toml::Value>,
        span: std::ops::Range<usize>,
        key: &str,
    ) -> Result<Vec<String>> {
        let items = match values {
            Some(toml::Value::Array(items)) if !items.is_empty() => items,
            _ => {
                return Err(self.err(span, format!("\"{key}\" must be a non-empty list")));
            }
        };
        items
            .iter()
            .map(|v| match v {
                toml::Value::String(s) => Ok(s.clone()),
                toml::Value::Integer(i) => Ok(i.to_string()),
                toml::Value::Boolean(b) => Ok(b.to_string()),
                other => Err(self.err(
                    span.clone(),
                    format!(
                        "\"{key}\" holds a {}; expected strings or integers",
                        other.type_str()
                    ),
                )),
            })
            .collect()
    }

    fn quality(
        &self,
        raw: &Spanned<RawQuality>,
        char_rules: &mut Vec<CharRule>,
    ) -> Result<QualityRule> {
        let q = raw.get_ref();
        if q.char == Some(0) {
            return Err(self.err(raw.span(), "char counts from 1"));
        }
        if let Some(mask) = self.mask(q.bit, q.mask, raw.span())? {
            if q.reject.is_some() || q.char.is_some() || q.min.is_some() || q.max.is_some() {
                return Err(self.err(
                    raw.span(),
                    "a quality bit test (bit or mask) takes no reject, char, min or max",
                ));
            }
            return Ok(QualityRule::Bits {
                column: q.column.clone(),
                mask,
                all: q.all.unwrap_or(false),
            });
        }
        if q.all.is_some() {
            return Err(self.err(raw.span(), "all applies only to a bit test (mask)"));
        }
        for (key, v) in [("min", q.min), ("max", q.max)] {
            if let Some(v) = v
                && v.is_nan()
            {
                return Err(self.err(
                    raw.span(),
                    format!("quality {key} must be a number, found {v}"),
                ));
            }
        }
        if let (Some(lo), Some(hi)) = (q.min, q.max)
            && lo > hi
        {
            return Err(self.err(
                raw.span(),
                format!("quality min {lo} is above max {hi}; no value could pass"),
            ));
        }
        match (&q.reject, q.min.or(q.max)) {
            (Some(values), None) => {
                let values = self.text_values(
                    Some(&toml::Value::Array(values.clone())),
                    raw.span(),
                    "reject",
                )?;
                if let Some(position) = q.char {
                    char_rules.push(CharRule {
                        column: q.column.clone(),
                        position,
                        line: self.line(raw.span()),
                    });
                }
                Ok(QualityRule::Reject {
                    column: q.column.clone(),
                    values,
                    char_position: q.char,
                })
            }
            (None, Some(_)) => Ok(QualityRule::Range {
                column: q.column.clone(),
                min: q.min,
                max: q.max,
            }),
            _ => Err(self.err(
                raw.span(),
                "a quality rule needs reject = [values], min / max, or a bit test (bit or mask)",
            )),
        }
    }
}

/// True for `[a-z][a-z0-9_]*`.
pub fn is_identifier(s: &str) -> bool {
    let mut chars = s.chars();
    matches!(chars.next(), Some(c) if c.is_ascii_lowercase())
        && chars.all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_')
}

/// Up to eight library ids sharing the first three characters of `id` (or the first eight ids).
fn nearby_ids(library: &BandLibrary, id: &str) -> String {
    let prefix: String = id.chars().take(3).collect::<String>().to_lowercase();
    let mut near: Vec<&str> = library
        .iter()
        .map(|b| b.id.as_str())
        .filter(|b| b.starts_with(&prefix))
        .take(8)
        .collect();
    if near.is_empty() {
        near = library.iter().map(|b| b.id.as_str()).take(8).collect();
        near.push("...");
    }
    near.join(", ")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str) -> Result<SurveySchema> {
        SurveySchema::from_str(text, Path::new("s.toml"), &BandLibrary::builtin())
    }

    const GOOD: &str = r#"survey = "nearir"
format = "csv"
id = "src"

[position]
ra = "ra"
dec = "dec"
error = { kind = "fixed", arcsec = 0.1 }

[epoch]
year = 2001.3

[[band]]
band = "tmass_j"
value = "jmag"
unit = "vega_mag"
error = "e_jmag"
nulls = [99.999]
limit = { kind = "flag", column = "qual", values = ["U"], char = 1 }

[[band]]
band = "tmass_ks"
value = "kmag"
unit = "vega_mag"
error = "e_kmag"
quality = [{ column = "cc", reject = ["D", "H"] }]
"#;

    #[test]
    fn a_good_schema_parses() {
        let s = parse(GOOD).unwrap();
        assert_eq!(s.survey, "nearir");
        assert_eq!(s.bands.len(), 2);
        assert_eq!(s.bands[0].line, 13);
        assert_eq!(
            s.bands[0].limit,
            Some(LimitMarker::Flag {
                column: "qual".into(),
                values: vec!["U".into()],
                char_position: Some(1)
            })
        );
        assert_eq!(s.epoch, Epoch::Fixed(2001.3));
        let cols: Vec<String> = s.referenced_columns().into_iter().map(|c| c.0).collect();
        assert_eq!(
            cols,
            [
                "src", "ra", "dec", "jmag", "e_jmag", "qual", "kmag", "e_kmag", "cc"
            ]
        );
    }

    #[test]
    fn an_unknown_band_names_its_line() {
        let text = GOOD.replace("band = \"tmass_ks\"", "band = \"tmass_kz\"");
        let err = parse(&text).unwrap_err().to_string();
        assert!(
            err.starts_with("s.toml:22: band \"tmass_kz\" is not in the band library"),
            "{err}"
        );
        assert!(err.contains("tmass_ks"), "{err}");
    }

    #[test]
    fn an_impossible_unit_names_its_line() {
        let text = GOOD.replace(
            "unit = \"vega_mag\"\nerror = \"e_kmag\"",
            "unit = \"furlongs\"\nerror = \"e_kmag\"",
        );
        let err = parse(&text).unwrap_err().to_string();
        assert!(
            err.starts_with("s.toml:24: unit \"furlongs\" is unknown; expected one of"),
            "{err}"
        );
    }

    #[test]
    fn an_ab_band_read_as_vega_is_refused() {
        let text = GOOD.replace("band = \"tmass_ks\"", "band = \"sdss_r\"");
        let err = parse(&text).unwrap_err().to_string();
        assert!(err.contains("is an AB band"), "{err}");
    }

    #[test]
    fn unknown_keys_are_refused() {
        let text = GOOD.replace("id = \"src\"", "id = \"src\"\nidentifier = \"x\"");
        let err = parse(&text).unwrap_err().to_string();
        assert!(err.contains("unknown field `identifier`"), "{err}");
    }

    #[test]
    fn proper_motion_errors_come_in_pairs() {
        let text = format!(
            "{GOOD}\n[proper_motion]\nra = \"pmra\"\ndec = \"pmde\"\nra_includes_cos_dec = true\nra_error = \"e_pmra\"\n"
        );
        let err = parse(&text).unwrap_err().to_string();
        assert!(
            err.ends_with(
                "proper_motion ra_error and dec_error go together: give both error columns (mas/yr) or neither"
            ),
            "{err}"
        );
        let both = text.replace(
            "ra_error = \"e_pmra\"\n",
            "ra_error = \"e_pmra\"\ndec_error = \"e_pmde\"\n",
        );
        let pm = parse(&both).unwrap().proper_motion.unwrap();
        assert_eq!(pm.errors, Some(("e_pmra".into(), "e_pmde".into())));
    }

    #[test]
    fn proper_motion_must_say_its_convention() {
        let text = format!("{GOOD}\n[proper_motion]\nra = \"pmra\"\ndec = \"pmde\"\n");
        let err = parse(&text).unwrap_err().to_string();
        assert!(err.contains("ra_includes_cos_dec"), "{err}");
    }

    #[test]
    fn magnitude_only_bands_refuse_flux_units() {
        let text = GOOD.replace(
            "band = \"tmass_ks\"\nvalue = \"kmag\"\nunit = \"vega_mag\"",
            "band = \"strom_y\"\nvalue = \"kmag\"\nunit = \"mJy\"",
        );
        let err = parse(&text).unwrap_err().to_string();
        assert!(err.contains("has no zero point"), "{err}");
    }

    #[test]
    fn depth_mag_and_its_snr_are_read_and_checked() {
        let with = |extra: &str| GOOD.replace("e_kmag\"\n", &format!("e_kmag\"\n{extra}"));
        let s = parse(&with("depth_mag = 14.3\ndepth_snr = 10\n")).unwrap();
        assert_eq!(s.bands[1].depth_mag, Some(14.3));
        assert_eq!(s.bands[1].depth_snr, Some(10.0));
        assert_eq!(s.bands[0].depth_mag, None);
        let s = parse(&with("depth_mag = 14.3\n")).unwrap();
        assert_eq!(
            (s.bands[1].depth_mag, s.bands[1].depth_snr),
            (Some(14.3), None)
        );
        // Lines 22-26 are the Ks band; the new key is line 26.
        assert_eq!(
            parse(&with("depth_mag = 41.0\n")).unwrap_err().to_string(),
            "s.toml:26: depth_mag must be a magnitude in [0, 40] (the survey's limit in the band's own system), found 41"
        );
        assert_eq!(
            parse(&with("depth_mag = nan\n")).unwrap_err().to_string(),
            "s.toml:26: depth_mag must be a magnitude in [0, 40] (the survey's limit in the band's own system), found NaN"
        );
        assert_eq!(
            parse(&with("depth_snr = 5\n")).unwrap_err().to_string(),
            "s.toml:26: depth_snr is the signal-to-noise ratio of depth_mag; give depth_mag too"
        );
        assert_eq!(
            parse(&with("depth_mag = 14.3\ndepth_snr = 0\n"))
                .unwrap_err()
                .to_string(),
            "s.toml:27: depth_snr must lie in (0, 1000], found 0"
        );
    }

    #[test]
    fn identifiers() {
        assert!(is_identifier("wise_w1"));
        assert!(!is_identifier("2mass"));
        assert!(!is_identifier("W1"));
        assert!(!is_identifier(""));
    }
}
