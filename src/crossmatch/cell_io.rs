//! A cell's input and output as Arrow IPC streams: what a worker process reads
//! and writes, and what the restart journal keeps of each finished cell.
//!
//! **Input** (one stream): a row per source the cell holds, in the whole
//! input's rank order — `rank`, `core`, `catalog`, `row`, the stored position
//! (`ra_deg`, `dec_deg`, `x`, `y`, `z`), `epoch_yr`, proper motion
//! (`pmra_cosdec_masyr`, `pmdec_masyr`, NaN when unknown), covariance
//! (`cov_ee_arcsec2`, `cov_nn_arcsec2`, `cov_en_arcsec2`), `sigma_rad`,
//! `forced` (Boolean) when some source was measured by forced photometry,
//! `extended` (Boolean) when some source is extended,
//! `pmra_cosdec_err_masyr`, `pmdec_err_masyr` when some source has errors of
//! its proper motion, and `band_value_0`, `band_value_1`, ... (one per band of
//! the catalog with the most bands: [`super::input::BandValue::code`] of the
//! source's value in that band of its catalog) when blends read them. The schema's metadata
//! carries what every cell shares: the cell (`fluxloom.cell.order`,
//! `fluxloom.cell.id`, `fluxloom.cell.margin_arcsec`), the catalogs' ln
//! densities, the systematic floor each catalog is matched with
//! (`fluxloom.systematic_arcsec`, measured ones included) and the epoch statistics. Numbers in metadata are written with
//! Rust's shortest round-trip form, so they read back bit for bit.
//!
//! **Output** (two streams, one after the other): the objects (`members`,
//! `member_probability`, `score`, `probability`, `flags`, `related`,
//! `contamination_share`, null when no member is contaminated, and
//! `covered_by`, the coarse sources over the object that it does not hold;
//! ranks of the whole input) and the links (`a`, `b`, `sep_arcsec`, `norm_dist`,
//! `ln_bayes`, `east_arcsec`, `north_arcsec`, `object_a`, `object_b`,
//! `moving_only`). The
//! objects' metadata carries the group counts.

use std::collections::HashMap;
use std::io::{Read, Write};
use std::path::Path;
use std::sync::Arc;

use arrow::array::{
    Array, ArrayRef, AsArray, BooleanArray, Float64Array, ListArray, PrimitiveArray, RecordBatch,
    UInt16Array, UInt32Array,
};
use arrow::buffer::OffsetBuffer;
use arrow::datatypes::{
    ArrowPrimitiveType, DataType, Field, Float64Type, Schema, UInt16Type, UInt32Type,
};
use arrow::ipc::reader::StreamReader;
use arrow::ipc::writer::StreamWriter;

use super::candidates::{Candidate, EpochStats};
use super::cells::{CellLink, CellOutput};
use super::prepare::Sources;
use super::resolve::ResolvedObject;
use super::tolerance::Covariance;
use crate::error::{Error, Result};

/// One cell with its margin, as a worker receives it.
#[derive(Debug, Clone)]
pub struct CellInput {
    /// HEALPix order of the cell.
    pub order: u8,
    /// NESTED index of the cell.
    pub id: u64,
    /// Width of the margin the cell holds, arcsec.
    pub margin_arcsec: f64,
    /// ln of each catalog's density, sources per steradian (whole input).
    pub ln_density_per_sr: Vec<f64>,
    /// Each catalog's systematic floor in the match, arcsec (the plan's, or
    /// the one measured against the astrometric reference).
    pub systematic_arcsec: Vec<f64>,
    /// Epoch statistics of the whole input.
    pub epochs: EpochStats,
    /// The sources the cell holds, rank order.
    pub sources: Sources,
    /// Whether each source is in the core.
    pub core: Vec<bool>,
    /// Each source's rank in the whole input.
    pub ranks: Vec<u32>,
}

fn f64_text(v: f64) -> String {
    format!("{v:?}")
}

fn f64_list(v: &[f64]) -> String {
    v.iter().map(|&x| f64_text(x)).collect::<Vec<_>>().join(",")
}

fn float_field(name: &str) -> Field {
    Field::new(name, DataType::Float64, false)
}

fn list_field(name: &str, item: DataType) -> Field {
    Field::new(
        name,
        DataType::List(Arc::new(Field::new_list_field(item, false))),
        false,
    )
}

fn floats(values: impl Iterator<Item = f64>) -> ArrayRef {
    Arc::new(Float64Array::from_iter_values(values))
}

fn u32s(values: impl Iterator<Item = u32>) -> ArrayRef {
    Arc::new(UInt32Array::from_iter_values(values))
}

/// A list column of `T` values, one list per item of `lists`.
fn lists<'a, T: ArrowPrimitiveType>(lists: impl Iterator<Item = &'a [T::Native]>) -> ArrayRef {
    let (mut lengths, mut values) = (Vec::new(), Vec::new());
    for l in lists {
        lengths.push(l.len());
        values.extend_from_slice(l);
    }
    Arc::new(ListArray::new(
        Arc::new(Field::new_list_field(T::DATA_TYPE, false)),
        OffsetBuffer::from_lengths(lengths),
        Arc::new(PrimitiveArray::<T>::from_iter_values(values)),
        None,
    ))
}

/// The batch of a cell's input.
///
/// # Errors
/// [`Error::Usage`] if Arrow refuses the columns (a bug).
pub fn input_batch(input: &CellInput) -> Result<RecordBatch> {
    let s = &input.sources;
    let mut fields = vec![
        Field::new("rank", DataType::UInt32, false),
        Field::new("core", DataType::Boolean, false),
        Field::new("catalog", DataType::UInt16, false),
        Field::new("row", DataType::UInt32, false),
    ];
    for name in FLOAT_INPUT_COLUMNS {
        fields.push(float_field(name));
    }
    let epochs = &input.epochs;
    let no_motion: Vec<String> = epochs
        .no_motion_epochs
        .iter()
        .map(|e| match e {
            Some((median, spread)) => format!("{}:{}", f64_text(*median), f64_text(*spread)),
            None => "-".to_string(),
        })
        .collect();
    let metadata: HashMap<String, String> = [
        ("fluxloom.cell.order", input.order.to_string()),
        ("fluxloom.cell.id", input.id.to_string()),
        ("fluxloom.cell.margin_arcsec", f64_text(input.margin_arcsec)),
        (
            "fluxloom.ln_density_per_sr",
            f64_list(&input.ln_density_per_sr),
        ),
        (
            "fluxloom.systematic_arcsec",
            f64_list(&input.systematic_arcsec),
        ),
        ("fluxloom.epochs.no_motion", no_motion.join(",")),
        (
            "fluxloom.epochs.max_abs_dt_yr",
            f64_text(epochs.max_abs_dt_yr),
        ),
        (
            "fluxloom.epochs.fastest_arcsec_per_yr",
            f64_text(epochs.fastest_arcsec_per_yr),
        ),
    ]
    .into_iter()
    .map(|(k, v)| (k.to_string(), v))
    .collect();
    let schema = Arc::new(Schema::new_with_metadata(fields, metadata));
    let columns: Vec<ArrayRef> = vec![
        u32s(input.ranks.iter().copied()),
        Arc::new(BooleanArray::from(input.core.clone())),
        Arc::new(UInt16Array::from(s.catalog.clone())),
        u32s(s.row.iter().copied()),
        floats(s.ra_deg.iter().copied()),
        floats(s.dec_deg.iter().copied()),
        floats(s.vec.iter().map(|v| v[0])),
        floats(s.vec.iter().map(|v| v[1])),
        floats(s.vec.iter().map(|v| v[2])),
        floats(s.epoch_yr.iter().copied()),
        floats(s.pm_masyr.iter().map(|p| p.0)),
        floats(s.pm_masyr.iter().map(|p| p.1)),
        floats(s.cov.iter().map(|c| c.ee)),
        floats(s.cov.iter().map(|c| c.nn)),
        floats(s.cov.iter().map(|c| c.en)),
        floats(s.sigma_rad.iter().copied()),
    ];
    // Optional markers, present only when some source carries them.
    let mut fields: Vec<Field> = schema.fields().iter().map(|f| f.as_ref().clone()).collect();
    let mut columns = columns;
    for (name, marks) in [("forced", &s.forced), ("extended", &s.extended)] {
        if !marks.is_empty() {
            fields.push(Field::new(name, DataType::Boolean, false));
            columns.push(Arc::new(BooleanArray::from(marks.clone())));
        }
    }
    if !s.pm_err_masyr.is_empty() {
        for (k, name) in PM_ERROR_INPUT_COLUMNS.iter().enumerate() {
            fields.push(float_field(name));
            columns.push(floats(
                s.pm_err_masyr
                    .iter()
                    .map(|e| if k == 0 { e.0 } else { e.1 }),
            ));
        }
    }
    if !s.photometry.is_empty() {
        for b in 0..s.bands {
            fields.push(float_field(&format!("band_value_{b}")));
            columns.push(floats(
                s.photometry.iter().skip(b).step_by(s.bands).copied(),
            ));
        }
    }
    let schema = Arc::new(Schema::new_with_metadata(fields, schema.metadata().clone()));
    RecordBatch::try_new(schema, columns).map_err(|e| Error::Usage(e.to_string()))
}

/// Optional columns of the proper-motion errors, present when some source has them.
const PM_ERROR_INPUT_COLUMNS: [&str; 2] = ["pmra_cosdec_err_masyr", "pmdec_err_masyr"];

const FLOAT_INPUT_COLUMNS: [&str; 12] = [
    "ra_deg",
    "dec_deg",
    "x",
    "y",
    "z",
    "epoch_yr",
    "pmra_cosdec_masyr",
    "pmdec_masyr",
    "cov_ee_arcsec2",
    "cov_nn_arcsec2",
    "cov_en_arcsec2",
    "sigma_rad",
];

/// Reads columns and metadata of IPC batches, naming `origin` in errors.
struct Columns<'a> {
    batch: &'a RecordBatch,
    origin: &'a Path,
}

impl Columns<'_> {
    fn column(&self, name: &str) -> Result<&ArrayRef> {
        self.batch.column_by_name(name).ok_or_else(|| {
            Error::format(
                self.origin,
                format!("the cell stream lacks column \"{name}\""),
            )
        })
    }

    fn mistyped(&self, name: &str, expected: &str) -> Error {
        Error::format(
            self.origin,
            format!("column \"{name}\" of the cell stream is not {expected}"),
        )
    }

    fn floats(&self, name: &str) -> Result<&[f64]> {
        let a = self
            .column(name)?
            .as_primitive_opt::<Float64Type>()
            .ok_or_else(|| self.mistyped(name, "Float64"))?;
        Ok(a.values())
    }

    /// The values of an optional Boolean column; empty when it is absent.
    fn optional_marks(&self, name: &str) -> Result<Vec<bool>> {
        match self.batch.column_by_name(name) {
            None => Ok(Vec::new()),
            Some(f) => {
                let f = f
                    .as_boolean_opt()
                    .ok_or_else(|| self.mistyped(name, "Boolean"))?;
                Ok((0..f.len()).map(|i| f.value(i)).collect())
            }
        }
    }

    fn u32s(&self, name: &str) -> Result<&[u32]> {
        let a = self
            .column(name)?
            .as_primitive_opt::<UInt32Type>()
            .ok_or_else(|| self.mistyped(name, "UInt32"))?;
        Ok(a.values())
    }

    /// The lists of a list column of `T` values.
    fn lists<T: ArrowPrimitiveType>(&self, name: &str) -> Result<Vec<Vec<T::Native>>> {
        let l = self
            .column(name)?
            .as_list_opt::<i32>()
            .ok_or_else(|| self.mistyped(name, "a list"))?;
        let values = l
            .values()
            .as_primitive_opt::<T>()
            .ok_or_else(|| self.mistyped(name, &format!("a list of {}", T::DATA_TYPE)))?;
        Ok(l.offsets()
            .windows(2)
            .map(|w| values.values()[w[0] as usize..w[1] as usize].to_vec())
            .collect())
    }

    fn meta(&self, key: &str) -> Result<&str> {
        self.batch
            .schema_ref()
            .metadata()
            .get(key)
            .map(String::as_str)
            .ok_or_else(|| {
                Error::format(
                    self.origin,
                    format!("the cell stream lacks metadata \"{key}\""),
                )
            })
    }

    fn parse<T: std::str::FromStr>(&self, key: &str, text: &str) -> Result<T> {
        text.parse().map_err(|_| {
            Error::format(
                self.origin,
                format!("metadata \"{key}\" of the cell stream: cannot read \"{text}\""),
            )
        })
    }

    fn meta_value<T: std::str::FromStr>(&self, key: &str) -> Result<T> {
        let text = self.meta(key)?;
        self.parse(key, text)
    }

    fn meta_floats(&self, key: &str) -> Result<Vec<f64>> {
        let text = self.meta(key)?;
        if text.is_empty() {
            return Ok(Vec::new());
        }
        text.split(',').map(|t| self.parse(key, t)).collect()
    }
}

/// The cell input of an IPC batch written by [`input_batch`]; `origin` names
/// the stream in errors.
///
/// # Errors
/// [`Error::Format`] naming a missing or mistyped column or metadata entry.
pub fn input_from_batch(batch: &RecordBatch, origin: &Path) -> Result<CellInput> {
    let c = Columns { batch, origin };
    let ln_density_per_sr = c.meta_floats("fluxloom.ln_density_per_sr")?;
    let ncat = ln_density_per_sr.len();
    let key = "fluxloom.epochs.no_motion";
    let no_motion_text = c.meta(key)?;
    let mut no_motion_epochs = Vec::with_capacity(ncat);
    for item in no_motion_text.split(',').filter(|t| !t.is_empty()) {
        no_motion_epochs.push(match item.split_once(':') {
            None if item == "-" => None,
            Some((m, s)) => Some((c.parse(key, m)?, c.parse(key, s)?)),
            None => {
                return Err(Error::format(
                    origin,
                    format!("metadata \"{key}\" of the cell stream: cannot read \"{item}\""),
                ));
            }
        });
    }
    if no_motion_epochs.len() != ncat {
        return Err(Error::format(
            origin,
            format!(
                "the cell stream gives densities of {ncat} catalogs but epochs of {}",
                no_motion_epochs.len()
            ),
        ));
    }
    let systematic_arcsec = c.meta_floats("fluxloom.systematic_arcsec")?;
    if systematic_arcsec.len() != ncat {
        return Err(Error::format(
            origin,
            format!(
                "the cell stream gives densities of {ncat} catalogs but floors of {}",
                systematic_arcsec.len()
            ),
        ));
    }
    let epochs = EpochStats {
        no_motion_epochs,
        max_abs_dt_yr: c.meta_value("fluxloom.epochs.max_abs_dt_yr")?,
        fastest_arcsec_per_yr: c.meta_value("fluxloom.epochs.fastest_arcsec_per_yr")?,
    };
    let catalog: Vec<u16> = c
        .column("catalog")?
        .as_primitive_opt::<UInt16Type>()
        .ok_or_else(|| c.mistyped("catalog", "UInt16"))?
        .values()
        .to_vec();
    if let Some(&k) = catalog.iter().find(|&&k| usize::from(k) >= ncat) {
        return Err(Error::format(
            origin,
            format!("the cell stream names catalog {k} of {ncat}"),
        ));
    }
    let core = c
        .column("core")?
        .as_boolean_opt()
        .ok_or_else(|| c.mistyped("core", "Boolean"))?;
    let core: Vec<bool> = (0..core.len()).map(|i| core.value(i)).collect();
    let ranks = c.u32s("rank")?.to_vec();
    if !ranks.windows(2).all(|w| w[0] < w[1]) {
        return Err(Error::format(
            origin,
            "the ranks of the cell stream are not ascending",
        ));
    }
    let (x, y, z) = (c.floats("x")?, c.floats("y")?, c.floats("z")?);
    let (ee, nn, en) = (
        c.floats("cov_ee_arcsec2")?,
        c.floats("cov_nn_arcsec2")?,
        c.floats("cov_en_arcsec2")?,
    );
    let (pmra, pmdec) = (c.floats("pmra_cosdec_masyr")?, c.floats("pmdec_masyr")?);
    let mut sources = Sources {
        row: c.u32s("row")?.to_vec(),
        ra_deg: c.floats("ra_deg")?.to_vec(),
        dec_deg: c.floats("dec_deg")?.to_vec(),
        epoch_yr: c.floats("epoch_yr")?.to_vec(),
        pm_masyr: pmra.iter().zip(pmdec).map(|(&a, &d)| (a, d)).collect(),
        vec: (0..x.len()).map(|i| [x[i], y[i], z[i]]).collect(),
        cov: (0..ee.len())
            .map(|i| Covariance {
                ee: ee[i],
                nn: nn[i],
                en: en[i],
            })
            .collect(),
        sigma_rad: c.floats("sigma_rad")?.to_vec(),
        catalog,
        catalog_start: Vec::with_capacity(ncat + 1),
        forced: c.optional_marks("forced")?,
        extended: c.optional_marks("extended")?,
        pm_err_masyr: match batch.column_by_name(PM_ERROR_INPUT_COLUMNS[0]) {
            None => Vec::new(),
            Some(_) => {
                let (a, d) = (
                    c.floats(PM_ERROR_INPUT_COLUMNS[0])?,
                    c.floats(PM_ERROR_INPUT_COLUMNS[1])?,
                );
                a.iter().zip(d).map(|(&a, &d)| (a, d)).collect()
            }
        },
        photometry: Vec::new(),
        bands: 0,
    };
    let mut band_columns: Vec<&[f64]> = Vec::new();
    while batch
        .column_by_name(&format!("band_value_{}", band_columns.len()))
        .is_some()
    {
        band_columns.push(c.floats(&format!("band_value_{}", band_columns.len()))?);
    }
    if !band_columns.is_empty() {
        sources.bands = band_columns.len();
        sources.photometry = (0..sources.len())
            .flat_map(|i| band_columns.iter().map(move |col| col[i]))
            .collect();
    }
    for k in 0..ncat {
        sources
            .catalog_start
            .push(sources.catalog.partition_point(|&c| usize::from(c) < k));
    }
    sources.catalog_start.push(sources.len());
    Ok(CellInput {
        order: c.meta_value("fluxloom.cell.order")?,
        id: c.meta_value("fluxloom.cell.id")?,
        margin_arcsec: c.meta_value("fluxloom.cell.margin_arcsec")?,
        ln_density_per_sr,
        systematic_arcsec,
        epochs,
        sources,
        core,
        ranks,
    })
}

/// The objects and links batches of a cell's output.
///
/// # Errors
/// [`Error::Usage`] if Arrow refuses the columns (a bug).
pub fn output_batches(out: &CellOutput) -> Result<(RecordBatch, RecordBatch)> {
    let o = &out.objects;
    let metadata: HashMap<String, String> = [
        ("fluxloom.groups", out.groups),
        ("fluxloom.largest_group", out.largest_group),
        ("fluxloom.approximate_groups", out.approximate_groups),
    ]
    .into_iter()
    .map(|(k, v)| (k.to_string(), v.to_string()))
    .collect();
    let objects_schema = Arc::new(Schema::new_with_metadata(
        vec![
            list_field("members", DataType::UInt32),
            list_field("member_probability", DataType::Float64),
            float_field("score"),
            float_field("probability"),
            Field::new("flags", DataType::UInt32, false),
            list_field("related", DataType::UInt32),
            Field::new("contamination_share", DataType::Float64, true),
            list_field("covered_by", DataType::UInt32),
        ],
        metadata,
    ));
    let objects = RecordBatch::try_new(
        objects_schema,
        vec![
            lists::<UInt32Type>(o.iter().map(|x| &x.members[..])),
            lists::<Float64Type>(o.iter().map(|x| &x.member_probability[..])),
            floats(o.iter().map(|x| x.score)),
            floats(o.iter().map(|x| x.probability)),
            u32s(o.iter().map(|x| x.flags)),
            lists::<UInt32Type>(o.iter().map(|x| &x.related[..])),
            Arc::new(Float64Array::from_iter(
                o.iter().map(|x| x.contamination_share),
            )),
            lists::<UInt32Type>(o.iter().map(|x| &x.covered_by[..])),
        ],
    )
    .map_err(|e| Error::Usage(e.to_string()))?;
    let l = &out.links;
    let links_schema = Arc::new(Schema::new(vec![
        Field::new("a", DataType::UInt32, false),
        Field::new("b", DataType::UInt32, false),
        float_field("sep_arcsec"),
        float_field("norm_dist"),
        float_field("ln_bayes"),
        float_field("east_arcsec"),
        float_field("north_arcsec"),
        Field::new("object_a", DataType::UInt32, false),
        Field::new("object_b", DataType::UInt32, false),
        Field::new("moving_only", DataType::Boolean, false),
    ]));
    let links = RecordBatch::try_new(
        links_schema,
        vec![
            u32s(l.iter().map(|x| x.pair.a)),
            u32s(l.iter().map(|x| x.pair.b)),
            floats(l.iter().map(|x| x.pair.sep_arcsec)),
            floats(l.iter().map(|x| x.pair.norm_dist)),
            floats(l.iter().map(|x| x.pair.ln_bayes)),
            floats(l.iter().map(|x| x.pair.east_arcsec)),
            floats(l.iter().map(|x| x.pair.north_arcsec)),
            u32s(l.iter().map(|x| x.object_a)),
            u32s(l.iter().map(|x| x.object_b)),
            Arc::new(BooleanArray::from(
                l.iter().map(|x| x.pair.moving_only).collect::<Vec<_>>(),
            )),
        ],
    )
    .map_err(|e| Error::Usage(e.to_string()))?;
    Ok((objects, links))
}

/// The cell output of the batches written by [`output_batches`].
///
/// # Errors
/// [`Error::Format`] naming a missing or mistyped column or metadata entry.
pub fn output_from_batches(
    objects: &RecordBatch,
    links: &RecordBatch,
    origin: &Path,
) -> Result<CellOutput> {
    let c = Columns {
        batch: objects,
        origin,
    };
    let members = c.lists::<UInt32Type>("members")?;
    let member_probability = c.lists::<Float64Type>("member_probability")?;
    let related = c.lists::<UInt32Type>("related")?;
    let mut covered_by = c.lists::<UInt32Type>("covered_by")?.into_iter();
    let (score, probability, flags) = (
        c.floats("score")?,
        c.floats("probability")?,
        c.u32s("flags")?,
    );
    let share = c
        .column("contamination_share")?
        .as_primitive_opt::<Float64Type>()
        .ok_or_else(|| c.mistyped("contamination_share", "Float64"))?;
    let objects: Vec<ResolvedObject> = members
        .into_iter()
        .zip(member_probability)
        .zip(related)
        .enumerate()
        .map(
            |(i, ((members, member_probability), related))| ResolvedObject {
                members,
                score: score[i],
                probability: probability[i],
                member_probability,
                flags: flags[i],
                related,
                contamination_share: share.is_valid(i).then(|| share.value(i)),
                covered_by: covered_by.next().unwrap_or_default(),
            },
        )
        .collect();
    if objects.iter().any(|o| o.members.is_empty()) {
        return Err(Error::format(
            origin,
            "the cell stream holds an object without members",
        ));
    }
    let groups = c.meta_value("fluxloom.groups")?;
    let largest_group = c.meta_value("fluxloom.largest_group")?;
    let approximate_groups = c.meta_value("fluxloom.approximate_groups")?;
    let c = Columns {
        batch: links,
        origin,
    };
    let (a, b) = (c.u32s("a")?, c.u32s("b")?);
    let (sep, norm, ln_bayes) = (
        c.floats("sep_arcsec")?,
        c.floats("norm_dist")?,
        c.floats("ln_bayes")?,
    );
    let (east, north) = (c.floats("east_arcsec")?, c.floats("north_arcsec")?);
    let (object_a, object_b) = (c.u32s("object_a")?, c.u32s("object_b")?);
    let moving_only = c
        .column("moving_only")?
        .as_boolean_opt()
        .ok_or_else(|| c.mistyped("moving_only", "Boolean"))?;
    let links = (0..a.len())
        .map(|i| CellLink {
            pair: Candidate {
                a: a[i],
                b: b[i],
                sep_arcsec: sep[i],
                norm_dist: norm[i],
                ln_bayes: ln_bayes[i],
                east_arcsec: east[i],
                north_arcsec: north[i],
                moving_only: moving_only.value(i),
            },
            object_a: object_a[i],
            object_b: object_b[i],
        })
        .collect();
    Ok(CellOutput {
        objects,
        links,
        groups,
        largest_group,
        approximate_groups,
    })
}

/// Writes `batch` as one IPC stream to `w`; `origin` names the destination in errors.
///
/// # Errors
/// [`Error::Io`] / [`Error::Format`] when writing fails.
pub fn write_stream<W: Write>(w: W, batch: &RecordBatch, origin: &Path) -> Result<()> {
    let mut writer =
        StreamWriter::try_new(w, batch.schema_ref()).map_err(|e| Error::columnar(origin, e))?;
    writer
        .write(batch)
        .map_err(|e| Error::columnar(origin, e))?;
    writer.finish().map_err(|e| Error::columnar(origin, e))
}

/// Reads one IPC stream from `r` (which may hold more streams after it) as one batch.
///
/// # Errors
/// [`Error::Format`] naming `origin` when the bytes are not an IPC stream.
pub fn read_stream<R: Read>(r: R, origin: &Path) -> Result<RecordBatch> {
    let reader = StreamReader::try_new(r, None).map_err(|e| Error::columnar(origin, e))?;
    let schema = reader.schema();
    let batches: Vec<RecordBatch> = reader
        .collect::<std::result::Result<_, _>>()
        .map_err(|e| Error::columnar(origin, e))?;
    arrow::compute::concat_batches(&schema, &batches).map_err(|e| Error::columnar(origin, e))
}

/// Writes a cell's output as its two streams (objects, then links).
///
/// # Errors
/// As [`write_stream`].
pub fn write_output<W: Write>(mut w: W, out: &CellOutput, origin: &Path) -> Result<()> {
    let (objects, links) = output_batches(out)?;
    write_stream(&mut w, &objects, origin)?;
    write_stream(&mut w, &links, origin)
}

/// Reads a cell's output written by [`write_output`].
///
/// # Errors
/// As [`read_stream`] and [`output_from_batches`].
pub fn read_output<R: Read>(mut r: R, origin: &Path) -> Result<CellOutput> {
    let objects = read_stream(&mut r, origin)?;
    let links = read_stream(&mut r, origin)?;
    output_from_batches(&objects, &links, origin)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::crossmatch::flags;

    #[test]
    fn output_round_trips_through_two_streams() {
        let out = CellOutput {
            objects: vec![
                ResolvedObject {
                    members: vec![3, 9],
                    score: 4.25,
                    probability: 0.985,
                    member_probability: vec![1.0, 0.985],
                    flags: flags::HAS_BLEND,
                    related: vec![12],
                    contamination_share: None,
                    covered_by: vec![12],
                },
                ResolvedObject {
                    members: vec![12],
                    score: 0.0,
                    probability: 1.0,
                    member_probability: vec![1.0],
                    flags: flags::BLEND | flags::CONTAMINATED,
                    related: vec![3],
                    contamination_share: Some(3.845e-4),
                    covered_by: Vec::new(),
                },
            ],
            links: vec![CellLink {
                pair: Candidate {
                    a: 3,
                    b: 9,
                    sep_arcsec: 0.1 + 0.2,
                    norm_dist: 1.0 / 3.0,
                    ln_bayes: -f64::MIN_POSITIVE,
                    east_arcsec: 1e-300,
                    north_arcsec: -0.0,
                    moving_only: true,
                },
                object_a: 3,
                object_b: 3,
            }],
            groups: 2,
            largest_group: 2,
            approximate_groups: 0,
        };
        let mut bytes = Vec::new();
        write_output(&mut bytes, &out, Path::new("test")).unwrap();
        let back = read_output(&bytes[..], Path::new("test")).unwrap();
        assert_eq!(back, out);
        assert!(back.links[0].pair.north_arcsec.is_sign_negative());
    }

    #[test]
    fn the_forced_marker_travels_with_the_cell_input() {
        let mut t = crate::crossmatch::SourceTable {
            name: "phot".into(),
            ..Default::default()
        };
        t.push_simple("a", 10.0, 20.0, 2016.0, 0.1);
        t.push_simple("b", 10.001, 20.0, 2016.0, 0.1);
        let config = crate::crossmatch::MatchConfig::new(1, 2016.0);
        let input = |t: &crate::crossmatch::SourceTable| {
            let sources = Sources::prepare(std::slice::from_ref(t), &config).unwrap();
            CellInput {
                order: 3,
                id: 5,
                margin_arcsec: 10.0,
                ln_density_per_sr: vec![20.0],
                systematic_arcsec: vec![0.25],
                epochs: EpochStats::of(&sources, 2016.0),
                core: vec![true; sources.len()],
                ranks: (0..sources.len() as u32).collect(),
                sources,
            }
        };
        let plain = input_batch(&input(&t)).unwrap();
        assert!(plain.column_by_name("forced").is_none());
        let back = input_from_batch(&plain, Path::new("cell")).unwrap();
        assert_eq!(back.systematic_arcsec, [0.25]);
        assert!(back.sources.forced.is_empty());
        t.forced = vec![false, true];
        let marked = input_batch(&input(&t)).unwrap();
        let back = input_from_batch(&marked, Path::new("cell")).unwrap();
        assert_eq!(back.sources.forced, [false, true]);
        assert!(back.sources.is_forced(1) && !back.sources.is_forced(0));
        assert!(back.sources.extended.is_empty());
        t.extended = vec![true, false];
        let marked = input_batch(&input(&t)).unwrap();
        let back = input_from_batch(&marked, Path::new("cell")).unwrap();
        assert_eq!(back.sources.extended, [true, false]);
        assert!(back.sources.is_extended(0) && !back.sources.is_extended(1));
        assert!(back.sources.pm_err_masyr.is_empty());
        t.pm_err_masyr = vec![(1.5, 2.5), (f64::NAN, f64::NAN)];
        let marked = input_batch(&input(&t)).unwrap();
        let back = input_from_batch(&marked, Path::new("cell")).unwrap();
        // No proper motion: the errors are kept unknown.
        assert!(back.sources.pm_err_masyr.iter().all(|e| e.0.is_nan()));
    }

    #[test]
    fn a_stream_without_a_column_names_it() {
        let batch = RecordBatch::try_new(
            Arc::new(Schema::new(vec![Field::new("a", DataType::UInt32, false)])),
            vec![u32s([1u32].into_iter())],
        )
        .unwrap();
        let err = input_from_batch(&batch, Path::new("cell.arrows")).unwrap_err();
        assert_eq!(
            err.to_string(),
            "cell.arrows: the cell stream lacks metadata \"fluxloom.ln_density_per_sr\""
        );
    }
}
