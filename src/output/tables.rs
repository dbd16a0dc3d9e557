//! The SED tables as Arrow record batches: objects (wide), photometry (long)
//! and links (every candidate pair). Column units travel in each field's `unit`
//! metadata; the column reference is in the README.

use std::collections::HashMap;
use std::sync::Arc;

use arrow::array::{
    ArrayRef, BooleanArray, Float64Array, Float64Builder, RecordBatch, StringArray, UInt16Array,
    UInt32Array, UInt64Array,
};
use arrow::datatypes::{DataType, Field, Schema, SchemaRef};

use crate::catalog::normalize::{status_column, status_type};
use crate::crossmatch::{Link, MatchedObject, SourceRef, SourceTable};
use crate::error::{Error, Result};
use crate::photometry::flux::nu_fnu_cgs;
use crate::sed::{BandSlot, Sed, SedStatus};
use std::fmt::Write as _;

fn field(name: &str, data_type: DataType, nullable: bool, unit: Option<&str>) -> Field {
    let f = Field::new(name, data_type, nullable);
    match unit {
        Some(u) => f.with_metadata(HashMap::from([("unit".to_string(), u.to_string())])),
        None => f,
    }
}

/// A field with a unit and a description: the description carries what a
/// standard unit string cannot (the time scale of a year, the system of a magnitude).
fn described(name: &str, data_type: DataType, unit: &str, description: &str) -> Field {
    field(name, data_type, true, Some(unit)).with_metadata(HashMap::from([
        ("unit".to_string(), unit.to_string()),
        ("description".to_string(), description.to_string()),
    ]))
}

/// Description of magnitude columns of magnitude-only bands.
const VEGA_MAG: &str = "Vega magnitude";

fn f64s(values: impl IntoIterator<Item = Option<f64>>) -> ArrayRef {
    Arc::new(values.into_iter().collect::<Float64Array>())
}

fn sed_status_names() -> Vec<&'static str> {
    SedStatus::ALL.iter().map(|s| s.as_str()).collect()
}

/// A band of the wide table: its id and the slots (catalogs) that give it.
struct WideBand<'a> {
    id: &'a str,
    has_flux: bool,
    /// Some catalog's schema marks saturated values in this band.
    saturates: bool,
    slots: Vec<usize>,
}

fn wide_bands(slots: &[BandSlot]) -> Vec<WideBand<'_>> {
    let mut bands: Vec<WideBand> = Vec::new();
    for (k, s) in slots.iter().enumerate() {
        match bands.iter_mut().find(|b| b.id == s.id()) {
            Some(b) => {
                b.slots.push(k);
                b.saturates |= s.spec.saturated.is_some();
            }
            None => bands.push(WideBand {
                id: s.id(),
                has_flux: s.spec.has_flux(),
                saturates: s.spec.saturated.is_some(),
                slots: vec![k],
            }),
        }
    }
    bands
}

/// Preference when several catalogs give one band: the best status wins, then
/// the earlier catalog.
fn status_rank(s: SedStatus) -> u8 {
    match s {
        SedStatus::Detected => 0,
        SedStatus::UpperLimit => 1,
        SedStatus::Blended => 2,
        SedStatus::Saturated => 3,
        SedStatus::NotDetected => 4,
        SedStatus::Missing => 5,
        SedStatus::Rejected => 6,
        SedStatus::NotCovered => 7,
    }
}

/// The objects table: one row per object, with per-catalog members and per-band values.
///
/// # Errors
/// A columnar error if the batch cannot be built.
pub fn objects_batch(
    objects: &[MatchedObject],
    seds: &[Sed],
    slots: &[BandSlot],
    tables: &[SourceTable],
    reference_epoch_yr: f64,
) -> Result<RecordBatch> {
    let mut fields = vec![
        field("object_id", DataType::Utf8, false, None),
        field("ra_deg", DataType::Float64, false, Some("deg")),
        field("dec_deg", DataType::Float64, false, Some("deg")),
        field("pos_err_arcsec", DataType::Float64, false, Some("arcsec")),
        field("pmra_cosdec_masyr", DataType::Float64, true, Some("mas/yr")),
        field("pmdec_masyr", DataType::Float64, true, Some("mas/yr")),
        field(
            "pm_fit_ra_cosdec_masyr",
            DataType::Float64,
            true,
            Some("mas/yr"),
        ),
        field("pm_fit_dec_masyr", DataType::Float64, true, Some("mas/yr")),
        field(
            "pm_fit_ra_cosdec_err_masyr",
            DataType::Float64,
            true,
            Some("mas/yr"),
        ),
        field(
            "pm_fit_dec_err_masyr",
            DataType::Float64,
            true,
            Some("mas/yr"),
        ),
        described(
            "epoch_yr",
            DataType::Float64,
            "yr",
            "epoch, Julian year (365.25 d)",
        )
        .with_nullable(false),
        field("n_catalogs", DataType::UInt16, false, None),
        field("n_detected", DataType::UInt16, false, None),
        field("flags", DataType::UInt32, false, None),
        field("status", DataType::Utf8, false, None),
        field("probability", DataType::Float64, false, None),
        field("related", DataType::Utf8, true, None),
        field("contamination_share", DataType::Float64, true, None),
        field("healpix29", DataType::UInt64, false, None),
    ];
    let opt = |v: f64| (!v.is_nan()).then_some(v);
    let mut columns: Vec<ArrayRef> = vec![
        object_ids(objects.iter().map(|o| o.anchor), tables),
        Arc::new(Float64Array::from_iter_values(
            objects.iter().map(|o| o.ra_deg),
        )),
        Arc::new(Float64Array::from_iter_values(
            objects.iter().map(|o| o.dec_deg),
        )),
        Arc::new(Float64Array::from_iter_values(
            objects.iter().map(|o| o.pos_err_arcsec),
        )),
        f64s(objects.iter().map(|o| opt(o.pmra_cosdec_masyr))),
        f64s(objects.iter().map(|o| opt(o.pmdec_masyr))),
        f64s(objects.iter().map(|o| opt(o.pm_fit_masyr[0]))),
        f64s(objects.iter().map(|o| opt(o.pm_fit_masyr[1]))),
        f64s(objects.iter().map(|o| opt(o.pm_fit_err_masyr[0]))),
        f64s(objects.iter().map(|o| opt(o.pm_fit_err_masyr[1]))),
        Arc::new(Float64Array::from_iter_values(
            objects.iter().map(|_| reference_epoch_yr),
        )),
        Arc::new(UInt16Array::from_iter_values(
            objects.iter().map(|o| o.members.len() as u16),
        )),
        Arc::new(UInt16Array::from_iter_values(seds.iter().map(|s| {
            s.points
                .iter()
                .filter(|p| p.status == SedStatus::Detected)
                .count() as u16
        }))),
        Arc::new(UInt32Array::from_iter_values(
            objects.iter().map(|o| o.flags),
        )),
        Arc::new(StringArray::from_iter_values(
            objects.iter().map(|o| o.status()),
        )),
        Arc::new(Float64Array::from_iter_values(
            objects.iter().map(|o| o.probability),
        )),
        related_ids(objects, tables),
        f64s(objects.iter().map(|o| o.contamination_share)),
        Arc::new(UInt64Array::from_iter_values(
            objects.iter().map(|o| o.healpix29),
        )),
    ];
    for (c, table) in tables.iter().enumerate() {
        let name = &table.name;
        fields.push(field(
            &format!("{name}_source_id"),
            DataType::Utf8,
            true,
            None,
        ));
        fields.push(field(
            &format!("{name}_sep_arcsec"),
            DataType::Float64,
            true,
            Some("arcsec"),
        ));
        fields.push(field(
            &format!("{name}_probability"),
            DataType::Float64,
            true,
            None,
        ));
        columns.push(Arc::new(StringArray::from(
            objects
                .iter()
                .map(|o| o.member(c).map(|m| &table.source_id[m.row]))
                .collect::<Vec<_>>(),
        )));
        columns.push(f64s(
            objects.iter().map(|o| o.member(c).map(|m| m.sep_arcsec)),
        ));
        columns.push(f64s(
            objects.iter().map(|o| o.member(c).map(|m| m.probability)),
        ));
    }
    let names = sed_status_names();
    for band in wide_bands(slots) {
        // For each object, the slot whose point is used.
        let chosen: Vec<usize> = seds
            .iter()
            .map(|s| {
                *band
                    .slots
                    .iter()
                    .min_by_key(|&&k| status_rank(s.points[k].status))
                    .expect("a band has a slot")
            })
            .collect();
        let (value, err, ulim, lower, unit) = if band.has_flux {
            ("flux_jy", "flux_err_jy", "ulim_jy", "flux_lower_jy", "Jy")
        } else {
            ("mag", "mag_err", "ulim_mag", "flux_lower_mag", "mag")
        };
        let id = band.id;
        type Pick = fn(&crate::sed::SedPoint) -> Option<f64>;
        let mut picks: Vec<(&str, Pick)> =
            vec![(value, |p| p.value), (err, |p| p.err), (ulim, |p| p.ulim)];
        // The lower bound of a saturated value, only for bands some schema
        // marks saturated.
        if band.saturates {
            picks.push((lower, |p| p.flux_lower));
        }
        for (suffix, pick) in picks {
            let name = format!("{id}_{suffix}");
            fields.push(if unit == "mag" && suffix != "mag_err" {
                described(&name, DataType::Float64, unit, VEGA_MAG)
            } else {
                field(&name, DataType::Float64, true, Some(unit))
            });
            columns.push(f64s(
                seds.iter().zip(&chosen).map(|(s, &k)| pick(&s.points[k])),
            ));
        }
        fields.push(field(&format!("{id}_status"), status_type(), false, None));
        columns.push(status_column(
            seds.iter()
                .zip(&chosen)
                .map(|(s, &k)| s.points[k].status as i8)
                .collect(),
            &names,
        ));
        if band.slots.len() > 1 {
            fields.push(field(&format!("{id}_catalog"), DataType::Utf8, false, None));
            columns.push(Arc::new(StringArray::from_iter_values(
                chosen.iter().map(|&k| slots[k].catalog_name.as_str()),
            )));
        }
    }
    let schema: SchemaRef = Arc::new(Schema::new(fields));
    RecordBatch::try_new(schema, columns).map_err(|e| Error::Usage(format!("objects table: {e}")))
}

/// The photometry table: one row per object and band of each catalog, with the
/// wavelength, ready for a fitter.
///
/// # Errors
/// A columnar error if the batch cannot be built.
pub fn photometry_batch(
    objects: &[MatchedObject],
    seds: &[Sed],
    slots: &[BandSlot],
    tables: &[SourceTable],
) -> Result<RecordBatch> {
    let n = objects.len() * slots.len();
    let mut catalog = Vec::with_capacity(n);
    let mut source_id: Vec<Option<&str>> = Vec::with_capacity(n);
    let mut band = Vec::with_capacity(n);
    let mut system = Vec::with_capacity(n);
    let mut wavelength = Vec::with_capacity(n);
    let mut zero_point = Vec::with_capacity(n);
    // Built in place: 11 columns of `Option<f64>` would take twice the memory.
    let mut cols: [Float64Builder; 11] = std::array::from_fn(|_| Float64Builder::with_capacity(n));
    // The lower bounds of saturated values, only when some schema marks saturation.
    let saturates = slots.iter().any(|s| s.spec.saturated.is_some());
    let mut status = Vec::with_capacity(n);
    for (o, sed) in objects.iter().zip(seds) {
        for (slot, p) in slots.iter().zip(&sed.points) {
            catalog.push(slot.catalog_name.as_str());
            source_id.push(
                o.member(slot.catalog)
                    .map(|m| &tables[slot.catalog].source_id[m.row]),
            );
            band.push(slot.id());
            system.push(slot.spec.band.system.as_str());
            wavelength.push(slot.spec.band.wavelength_um);
            zero_point.push(slot.spec.band.zero_point_jy);
            // Flux bands fill the Jy columns; magnitude-only bands the magnitude columns.
            let flux = slot.spec.has_flux();
            let as_flux = |v: Option<f64>| if flux { v } else { None };
            let as_mag = |v: Option<f64>| if flux { None } else { v };
            cols[0].append_option(as_flux(p.value));
            cols[1].append_option(as_flux(p.err));
            cols[2].append_option(as_flux(p.lo));
            cols[3].append_option(as_flux(p.hi));
            cols[4].append_option(as_flux(p.ulim));
            cols[5].append_option(
                as_flux(p.value).map(|v| nu_fnu_cgs(v, slot.spec.band.wavelength_um)),
            );
            cols[6].append_option(as_mag(p.value));
            cols[7].append_option(as_mag(p.err));
            cols[8].append_option(as_mag(p.ulim));
            cols[9].append_option(as_flux(p.flux_lower));
            cols[10].append_option(as_mag(p.flux_lower));
            status.push(p.status as i8);
        }
    }
    let mut fields = vec![
        field("object_id", DataType::Utf8, false, None),
        field("catalog", DataType::Utf8, false, None),
        field("source_id", DataType::Utf8, true, None),
        field("band", DataType::Utf8, false, None),
        field("system", DataType::Utf8, false, None),
        field("wavelength_um", DataType::Float64, false, Some("um")),
        field("zero_point_jy", DataType::Float64, true, Some("Jy")),
    ];
    for (name, unit) in [
        ("flux_jy", "Jy"),
        ("flux_err_jy", "Jy"),
        ("flux_lo_jy", "Jy"),
        ("flux_hi_jy", "Jy"),
        ("ulim_jy", "Jy"),
        ("nufnu_cgs", "mW.m**-2"),
        ("mag", "mag"),
        ("mag_err", "mag"),
        ("ulim_mag", "mag"),
        ("flux_lower_jy", "Jy"),
        ("flux_lower_mag", "mag"),
    ]
    .into_iter()
    .take(if saturates { 11 } else { 9 })
    {
        fields.push(match name {
            "mag" | "ulim_mag" | "flux_lower_mag" => {
                described(name, DataType::Float64, unit, VEGA_MAG)
            }
            "nufnu_cgs" => described(
                name,
                DataType::Float64,
                unit,
                "nu F_nu; 1 mW m-2 = 1 erg s-1 cm-2",
            ),
            _ => field(name, DataType::Float64, true, Some(unit)),
        });
    }
    fields.push(field("status", status_type(), false, None));
    let mut columns: Vec<ArrayRef> = vec![
        object_ids(
            objects
                .iter()
                .flat_map(|o| std::iter::repeat_n(o.anchor, slots.len())),
            tables,
        ),
        Arc::new(StringArray::from(catalog)),
        Arc::new(StringArray::from(source_id)),
        Arc::new(StringArray::from(band)),
        Arc::new(StringArray::from(system)),
        Arc::new(Float64Array::from(wavelength)),
        f64s(zero_point),
    ];
    columns.extend(
        cols.iter_mut()
            .take(if saturates { 11 } else { 9 })
            .map(|b| Arc::new(b.finish()) as ArrayRef),
    );
    columns.push(status_column(status, &sed_status_names()));
    RecordBatch::try_new(Arc::new(Schema::new(fields)), columns)
        .map_err(|e| Error::Usage(format!("photometry table: {e}")))
}

/// Appends the identifier `<catalog>:<source id>` of the object anchored on `a`
/// to the value being built.
fn push_object_id(b: &mut arrow::array::StringBuilder, a: SourceRef, tables: &[SourceTable]) {
    let t = &tables[a.catalog as usize];
    b.write_str(&t.name)
        .and_then(|()| b.write_char(':'))
        .and_then(|()| b.write_str(&t.source_id[a.row as usize]))
        .expect("writing to a string builder");
}

/// Object identifiers `<catalog>:<source id>` of anchors, written straight into
/// one Arrow string array.
fn object_ids(anchors: impl Iterator<Item = SourceRef>, tables: &[SourceTable]) -> ArrayRef {
    let mut b = arrow::array::StringBuilder::new();
    for a in anchors {
        push_object_id(&mut b, a, tables);
        b.append_value("");
    }
    Arc::new(b.finish())
}

/// The `related` column: the related objects' identifiers joined by commas,
/// null for an object without relations.
fn related_ids(objects: &[MatchedObject], tables: &[SourceTable]) -> ArrayRef {
    let mut b = arrow::array::StringBuilder::new();
    for o in objects {
        if o.related.is_empty() {
            b.append_null();
            continue;
        }
        for (k, &r) in o.related.iter().enumerate() {
            if k > 0 {
                b.write_char(',').expect("writing to a string builder");
            }
            push_object_id(&mut b, r, tables);
        }
        b.append_value("");
    }
    Arc::new(b.finish())
}

/// The links table: every candidate pair, chosen or not.
///
/// # Errors
/// A columnar error if the batch cannot be built.
pub fn links_batch(links: &[Link], tables: &[SourceTable]) -> Result<RecordBatch> {
    let fields = vec![
        field("object_a", DataType::Utf8, false, None),
        field("object_b", DataType::Utf8, false, None),
        field("catalog_a", DataType::Utf8, false, None),
        field("source_id_a", DataType::Utf8, false, None),
        field("catalog_b", DataType::Utf8, false, None),
        field("source_id_b", DataType::Utf8, false, None),
        field("sep_arcsec", DataType::Float64, false, Some("arcsec")),
        field("norm_dist", DataType::Float64, false, None),
        field("ln_bayes", DataType::Float64, false, None),
        field("probability", DataType::Float64, false, None),
        field("chosen", DataType::Boolean, false, None),
        field(
            "dra_cosdec_arcsec",
            DataType::Float64,
            false,
            Some("arcsec"),
        ),
        field("ddec_arcsec", DataType::Float64, false, Some("arcsec")),
        field("moving_only", DataType::Boolean, false, None),
    ];
    let columns: Vec<ArrayRef> = vec![
        object_ids(links.iter().map(|l| l.object_a), tables),
        object_ids(links.iter().map(|l| l.object_b), tables),
        Arc::new(StringArray::from_iter_values(
            links.iter().map(|l| tables[l.catalog_a].name.as_str()),
        )),
        Arc::new(StringArray::from_iter_values(
            links
                .iter()
                .map(|l| &tables[l.catalog_a].source_id[l.row_a]),
        )),
        Arc::new(StringArray::from_iter_values(
            links.iter().map(|l| tables[l.catalog_b].name.as_str()),
        )),
        Arc::new(StringArray::from_iter_values(
            links
                .iter()
                .map(|l| &tables[l.catalog_b].source_id[l.row_b]),
        )),
        Arc::new(Float64Array::from_iter_values(
            links.iter().map(|l| l.sep_arcsec),
        )),
        Arc::new(Float64Array::from_iter_values(
            links.iter().map(|l| l.norm_dist),
        )),
        Arc::new(Float64Array::from_iter_values(
            links.iter().map(|l| l.ln_bayes),
        )),
        Arc::new(Float64Array::from_iter_values(
            links.iter().map(|l| l.probability),
        )),
        Arc::new(BooleanArray::from(
            links.iter().map(|l| l.chosen).collect::<Vec<_>>(),
        )),
        Arc::new(Float64Array::from_iter_values(
            links.iter().map(|l| l.dra_cosdec_arcsec),
        )),
        Arc::new(Float64Array::from_iter_values(
            links.iter().map(|l| l.ddec_arcsec),
        )),
        Arc::new(BooleanArray::from(
            links.iter().map(|l| l.moving_only).collect::<Vec<_>>(),
        )),
    ];
    RecordBatch::try_new(Arc::new(Schema::new(fields)), columns)
        .map_err(|e| Error::Usage(format!("links table: {e}")))
}

/// The batch with column types every export format takes: dictionary-encoded
/// text as plain text and 16-bit unsigned integers as 32-bit signed ones; field
/// metadata (units) kept.
///
/// # Errors
/// A usage error if a cast fails (it does not for these types).
pub fn for_export(batch: &RecordBatch) -> Result<RecordBatch> {
    let mut fields = Vec::with_capacity(batch.num_columns());
    let mut columns = Vec::with_capacity(batch.num_columns());
    for (f, col) in batch.schema().fields().iter().zip(batch.columns()) {
        let target = match f.data_type() {
            DataType::Dictionary(_, value) => Some(value.as_ref().clone()),
            DataType::UInt16 => Some(DataType::Int32),
            _ => None,
        };
        match target {
            Some(t) => {
                let cast = arrow::compute::cast(col, &t)
                    .map_err(|e| Error::Usage(format!("export of column {}: {e}", f.name())))?;
                fields.push(f.as_ref().clone().with_data_type(t));
                columns.push(cast);
            }
            None => {
                fields.push(f.as_ref().clone());
                columns.push(col.clone());
            }
        }
    }
    RecordBatch::try_new(Arc::new(Schema::new(fields)), columns)
        .map_err(|e| Error::Usage(format!("export table: {e}")))
}

/// The sources of the hard cases: every member of an object flagged ambiguous,
/// blend or under a blend, and every source a candidate pair links to one of
/// them, each with the object it ended in, its position at the epoch pairs are
/// compared (the reference epoch for a source with a proper motion, its own
/// epoch otherwise), after any offset correction (`tables` as matched), and its
/// 1σ error ellipse — what a chart of such a case needs.
///
/// # Errors
/// A columnar error if the batch cannot be built.
pub fn hard_sources_batch(
    objects: &[MatchedObject],
    links: &[Link],
    tables: &[SourceTable],
    reference_epoch_yr: f64,
) -> Result<RecordBatch> {
    use crate::crossmatch::flags::{AMBIGUOUS, BLEND, HAS_BLEND};
    let mut rows: std::collections::BTreeMap<SourceRef, SourceRef> = Default::default();
    for o in objects {
        if o.flags & (AMBIGUOUS | BLEND | HAS_BLEND) != 0 {
            for m in &o.members {
                let s = SourceRef {
                    catalog: m.catalog as u32,
                    row: m.row as u32,
                };
                rows.insert(s, o.anchor);
            }
        }
    }
    let mut linked: Vec<(SourceRef, SourceRef)> = Vec::new();
    for l in links {
        let a = SourceRef {
            catalog: l.catalog_a as u32,
            row: l.row_a as u32,
        };
        let b = SourceRef {
            catalog: l.catalog_b as u32,
            row: l.row_b as u32,
        };
        if rows.contains_key(&a) {
            linked.push((b, l.object_b));
        }
        if rows.contains_key(&b) {
            linked.push((a, l.object_a));
        }
    }
    for (s, object) in linked {
        rows.entry(s).or_insert(object);
    }
    // Rank order (catalog, then source identifier) of object, then source: the
    // order of the objects table, so that parts of the sky merge by sorting.
    let id = |r: &SourceRef| &tables[r.catalog as usize].source_id[r.row as usize];
    let mut order: Vec<(SourceRef, SourceRef)> = rows.into_iter().map(|(s, o)| (o, s)).collect();
    order.sort_unstable_by(|x, y| {
        (x.0.catalog, id(&x.0), x.1.catalog, id(&x.1)).cmp(&(
            y.0.catalog,
            id(&y.0),
            y.1.catalog,
            id(&y.1),
        ))
    });
    let fields = vec![
        field("object_id", DataType::Utf8, false, None),
        field("catalog", DataType::Utf8, false, None),
        field("source_id", DataType::Utf8, false, None),
        field("ra_deg", DataType::Float64, false, Some("deg")),
        field("dec_deg", DataType::Float64, false, Some("deg")),
        field("err_major_arcsec", DataType::Float64, false, Some("arcsec")),
        field("err_minor_arcsec", DataType::Float64, false, Some("arcsec")),
        field("err_pa_deg", DataType::Float64, false, Some("deg")),
    ];
    let position = |s: &SourceRef| -> (f64, f64) {
        let t = &tables[s.catalog as usize];
        let i = s.row as usize;
        let (pmra, pmdec, epoch) = (t.pmra_cosdec_masyr[i], t.pmdec_masyr[i], t.epoch_yr[i]);
        if pmra.is_finite() && pmdec.is_finite() && epoch.is_finite() {
            crate::sky::propagation::propagate_deg(
                t.ra_deg[i],
                t.dec_deg[i],
                pmra,
                pmdec,
                reference_epoch_yr - epoch,
            )
        } else {
            (t.ra_deg[i], t.dec_deg[i])
        }
    };
    let columns: Vec<ArrayRef> = vec![
        object_ids(order.iter().map(|(o, _)| *o), tables),
        Arc::new(StringArray::from_iter_values(
            order
                .iter()
                .map(|(_, s)| tables[s.catalog as usize].name.as_str()),
        )),
        Arc::new(StringArray::from_iter_values(order.iter().map(|(_, s)| {
            &tables[s.catalog as usize].source_id[s.row as usize]
        }))),
        Arc::new(Float64Array::from_iter_values(
            order.iter().map(|(_, s)| position(s).0),
        )),
        Arc::new(Float64Array::from_iter_values(
            order.iter().map(|(_, s)| position(s).1),
        )),
        Arc::new(Float64Array::from_iter_values(order.iter().map(
            |(_, s)| tables[s.catalog as usize].err_major_arcsec[s.row as usize],
        ))),
        Arc::new(Float64Array::from_iter_values(order.iter().map(
            |(_, s)| tables[s.catalog as usize].err_minor_arcsec[s.row as usize],
        ))),
        Arc::new(Float64Array::from_iter_values(order.iter().map(
            |(_, s)| tables[s.catalog as usize].err_pa_deg[s.row as usize],
        ))),
    ];
    RecordBatch::try_new(Arc::new(Schema::new(fields)), columns)
        .map_err(|e| Error::Usage(format!("hard sources table: {e}")))
}
