//! The science table, `science.parquet`: one row per object.
//!
//! Units are in the column names and in each field's `unit` metadata; the
//! settings, the law, the photosphere and the class scheme are in the file's
//! key-value metadata (`fluxloom.science.*`), next to the input's
//! `fluxloom.bands`, `fluxloom.field` and `fluxloom.plan`.

use std::collections::HashMap;
use std::path::Path;
use std::sync::Arc;

use arrow::array::{ArrayRef, BooleanArray, Float64Array, RecordBatch, StringArray, UInt32Array};
use arrow::datatypes::{Field, Schema};

use super::compute::{AlphaResult, Science};
use super::sed_table::FieldSeds;
use crate::error::{Error, Result};
use crate::output::parquet::ParquetOutput;

/// The science table's file name.
pub const SCIENCE_FILE: &str = "science.parquet";

struct Columns {
    fields: Vec<Field>,
    arrays: Vec<ArrayRef>,
}

impl Columns {
    fn push(&mut self, name: &str, unit: Option<&str>, array: ArrayRef) {
        let f = Field::new(name, array.data_type().clone(), true);
        self.fields.push(match unit {
            Some(u) => f.with_metadata(HashMap::from([("unit".to_string(), u.to_string())])),
            None => f,
        });
        self.arrays.push(array);
    }

    fn f64(&mut self, name: &str, unit: &str, v: Vec<Option<f64>>) {
        self.push(name, Some(unit), Arc::new(Float64Array::from(v)));
    }

    fn text(&mut self, name: &str, v: Vec<Option<String>>) {
        self.push(name, None, Arc::new(StringArray::from(v)));
    }
}

fn alpha_columns(c: &mut Columns, prefix: &str, a: &[&AlphaResult]) {
    c.f64(
        prefix,
        "1",
        a.iter().map(|r| r.fit.map(|f| f.alpha)).collect(),
    );
    c.f64(
        &format!("{prefix}_err"),
        "1",
        a.iter().map(|r| r.fit.and_then(|f| f.alpha_err)).collect(),
    );
    c.push(
        &format!("{prefix}_n_points"),
        None,
        Arc::new(UInt32Array::from(
            a.iter()
                .map(|r| r.fit.map_or(0, |f| f.n_points as u32))
                .collect::<Vec<u32>>(),
        )),
    );
    c.text(
        &format!("{prefix}_class"),
        a.iter()
            .map(|r| Some(r.class.map_or("unclassified", |k| k.as_str()).to_string()))
            .collect(),
    );
    c.f64(
        &format!("{prefix}_lower_bound"),
        "1",
        a.iter().map(|r| r.lower_bound).collect(),
    );
    c.f64(
        &format!("{prefix}_upper_bound"),
        "1",
        a.iter().map(|r| r.upper_bound).collect(),
    );
}

/// The science of a field as one record batch.
///
/// # Errors
/// A usage error if the batch cannot be assembled.
pub fn science_batch(seds: &FieldSeds, sci: &Science) -> Result<RecordBatch> {
    let mut c = Columns {
        fields: Vec::new(),
        arrays: Vec::new(),
    };
    let o = &sci.objects;
    c.text(
        "object_id",
        seds.object_id.iter().cloned().map(Some).collect(),
    );
    alpha_columns(
        &mut c,
        "alpha",
        &o.iter().map(|x| &x.alpha).collect::<Vec<_>>(),
    );
    c.f64("av_mag", "mag", o.iter().map(|x| x.av_mag).collect());
    alpha_columns(
        &mut c,
        "alpha_dered",
        &o.iter().map(|x| &x.alpha_dered).collect::<Vec<_>>(),
    );
    let anchor_l = seds
        .band_index(&sci.settings.anchor)
        .map(|i| seds.bands[i].wavelength_um);
    let list = |x: &super::compute::ObjectScience, red: bool| -> Option<String> {
        let a = anchor_l?;
        let v: Vec<&str> = x
            .flagged_bands(&seds.bands, move |l| if red { l > a } else { l < a })
            .collect();
        Some(v.join(","))
    };
    c.push(
        "ir_excess",
        None,
        Arc::new(BooleanArray::from(
            o.iter()
                .map(|x| list(x, true).map(|s| !s.is_empty()))
                .collect::<Vec<_>>(),
        )),
    );
    c.text("ir_excess_bands", o.iter().map(|x| list(x, true)).collect());
    c.push(
        "uv_excess",
        None,
        Arc::new(BooleanArray::from(
            o.iter()
                .map(|x| list(x, false).map(|s| !s.is_empty()))
                .collect::<Vec<_>>(),
        )),
    );
    c.text(
        "uv_excess_bands",
        o.iter().map(|x| list(x, false)).collect(),
    );
    c.push(
        "excess_dereddened",
        None,
        Arc::new(BooleanArray::from(
            o.iter()
                .map(|x| Some(x.excess_dereddened))
                .collect::<Vec<_>>(),
        )),
    );
    for (k, &(i, j)) in sci.colours.iter().enumerate() {
        let name = format!("{}_minus_{}", seds.bands[i].id, seds.bands[j].id);
        c.f64(
            &format!("{name}_mag"),
            "mag",
            o.iter()
                .map(|x| x.colours[k].map(|c| c.value_mag))
                .collect(),
        );
        c.f64(
            &format!("{name}_err_mag"),
            "mag",
            o.iter()
                .map(|x| x.colours[k].and_then(|c| c.err_mag))
                .collect(),
        );
        c.text(
            &format!("{name}_kind"),
            o.iter()
                .map(|x| x.colours[k].map(|c| c.kind.as_str().to_string()))
                .collect(),
        );
        c.f64(
            &format!("{name}_dered_mag"),
            "mag",
            o.iter().map(|x| x.colours_dered[k]).collect(),
        );
    }
    if o.iter().any(|x| x.stromgren.is_some()) {
        for (name, pick) in [
            ("strom_b_minus_y_mag", 0usize),
            ("strom_m1_mag", 1),
            ("strom_c1_mag", 2),
        ] {
            c.f64(
                name,
                "mag",
                o.iter()
                    .map(|x| x.stromgren.map(|s| [s.0, s.1, s.2][pick]))
                    .collect(),
            );
        }
    }
    if sci.settings.halpha.is_some() {
        for (name, second) in [("halpha_r_minus_halpha", false), ("halpha_r_minus_i", true)] {
            let get = |x: &super::compute::ObjectScience| {
                if second { x.halpha.1 } else { x.halpha.0 }
            };
            c.f64(
                &format!("{name}_mag"),
                "mag",
                o.iter().map(|x| get(x).map(|c| c.value_mag)).collect(),
            );
            c.f64(
                &format!("{name}_err_mag"),
                "mag",
                o.iter().map(|x| get(x).and_then(|c| c.err_mag)).collect(),
            );
            c.text(
                &format!("{name}_kind"),
                o.iter()
                    .map(|x| get(x).map(|c| c.kind.as_str().to_string()))
                    .collect(),
            );
        }
    }
    for (k, b) in seds.bands.iter().enumerate() {
        let id = &b.id;
        c.f64(
            &format!("{id}_dered_flux_jy"),
            "Jy",
            o.iter().map(|x| x.bands[k].dered_flux_jy).collect(),
        );
        c.f64(
            &format!("{id}_dered_flux_err_jy"),
            "Jy",
            o.iter().map(|x| x.bands[k].dered_flux_err_jy).collect(),
        );
        c.f64(
            &format!("{id}_phot_jy"),
            "Jy",
            o.iter().map(|x| x.bands[k].phot_jy).collect(),
        );
        c.f64(
            &format!("{id}_excess_mag"),
            "mag",
            o.iter().map(|x| x.bands[k].excess_mag).collect(),
        );
        c.f64(
            &format!("{id}_excess_chi"),
            "1",
            o.iter().map(|x| x.bands[k].excess_chi).collect(),
        );
    }
    RecordBatch::try_new(Arc::new(Schema::new(c.fields)), c.arrays)
        .map_err(|e| Error::Usage(format!("science table: {e}")))
}

/// Writes the science table to `path` with the settings and the input's
/// band table, field and plan in its key-value metadata. Returns the rows written.
///
/// # Errors
/// I/O and columnar errors naming the file.
pub fn write_science(path: &Path, seds: &FieldSeds, sci: &Science) -> Result<u64> {
    let batch = science_batch(seds, sci)?;
    let mut meta = sci.settings.metadata();
    for key in ["fluxloom.field", "fluxloom.bands", "fluxloom.plan"] {
        if let Some(v) = seds.meta(key) {
            meta.push((key.to_string(), v.to_string()));
        }
    }
    let a_over_av: Vec<serde_json::Value> = seds
        .bands
        .iter()
        .zip(&sci.a_over_av)
        .map(|(b, k)| serde_json::json!({ "band": b.id, "wavelength_um": b.wavelength_um, "a_over_av": k }))
        .collect();
    meta.push((
        "fluxloom.science.a_over_av".into(),
        serde_json::Value::Array(a_over_av).to_string(),
    ));
    let mut w = ParquetOutput::create(path, batch.schema(), meta)?;
    w.write(&batch)?;
    w.finish()
}
