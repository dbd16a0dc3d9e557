//! Reading the SED tables of an output folder as the science layer sees them.
//!
//! [`FieldSeds::read`] opens `objects.parquet`, takes the band table from its
//! `fluxloom.bands` key-value metadata, and collects per object and band the
//! detection (flux density and error, or magnitude and error for a
//! magnitude-only band), the upper limit and the status. It reads only the
//! published columns (`<band>_flux_jy`, `<band>_flux_err_jy`, `<band>_ulim_jy`,
//! `<band>_mag`, `<band>_mag_err`, `<band>_ulim_mag`, `<band>_status`), so it
//! does not depend on the row order or on how the tables were built.

use std::fs::File;
use std::path::{Path, PathBuf};

use arrow::array::{Array, AsArray, RecordBatch};
use arrow::datatypes::{DataType, Float64Type};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
use serde::Deserialize;

use crate::error::{Error, Result};

/// The file the SEDs are read from, inside an output folder.
pub const OBJECTS_FILE: &str = "objects.parquet";

/// One band of the band table carried in the output metadata.
#[derive(Debug, Clone, PartialEq, Default, Deserialize)]
pub struct BandInfo {
    /// Band id, the prefix of its columns.
    pub id: String,
    /// Magnitude system: `vega` or `ab`.
    pub system: String,
    /// Short name, e.g. `Ks`.
    pub name: String,
    /// Wavelength, µm.
    pub wavelength_um: f64,
    /// Zero-magnitude flux density, Jy; `None` for a magnitude-only band.
    pub zero_point_jy: Option<f64>,
    /// The limiting magnitude a survey schema states for the band (its own
    /// system), the deepest when several catalogs give the band.
    pub depth_mag: Option<f64>,
    /// The signal-to-noise ratio of `depth_mag`, when stated.
    pub depth_snr: Option<f64>,
    /// The catalog whose schema gave `depth_mag`.
    pub depth_catalog: Option<String>,
}

/// One band of one object.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct BandValue {
    /// Detected flux density, Jy (flux bands).
    pub flux_jy: Option<f64>,
    /// Its 1σ error, Jy.
    pub flux_err_jy: Option<f64>,
    /// Upper limit on the flux density, Jy.
    pub ulim_jy: Option<f64>,
    /// Detected magnitude (magnitude-only bands).
    pub mag: Option<f64>,
    /// Its 1σ error, mag.
    pub mag_err: Option<f64>,
    /// Upper limit as a magnitude (the source is fainter than this).
    pub ulim_mag: Option<f64>,
    /// The status is `blended`: the limit is a coarse source's flux over this
    /// and other objects, not the survey's depth.
    pub blended: bool,
}

impl BandValue {
    /// The detection as a magnitude in the band's own system with its error:
    /// m = −2.5 log10(F/F0), σ_m = (2.5/ln 10) σ_F/F (FIELD §1.4, first order).
    pub fn detected_mag(&self, band: &BandInfo) -> Option<(f64, Option<f64>)> {
        if let Some(m) = self.mag {
            return Some((m, self.mag_err));
        }
        let f = self.flux_jy.filter(|f| *f > 0.0)?;
        let f0 = band.zero_point_jy?;
        let err = self
            .flux_err_jy
            .filter(|e| *e > 0.0)
            .map(|e| MAG_PER_LN_FLUX * e / f);
        Some((-2.5 * (f / f0).log10(), err))
    }

    /// The upper limit as a magnitude (the true magnitude is ≥ this).
    pub fn limit_mag(&self, band: &BandInfo) -> Option<f64> {
        if let Some(m) = self.ulim_mag {
            return Some(m);
        }
        let f = self.ulim_jy.filter(|f| *f > 0.0)?;
        Some(-2.5 * (f / band.zero_point_jy?).log10())
    }
}

/// 2.5 / ln 10 = 1.0857362 mag per unit of ln F (FIELD §1.1, computed there).
pub const MAG_PER_LN_FLUX: f64 = 1.085_736_204_758_129_6;

/// The SEDs of a field: the bands, and per object one [`BandValue`] per band.
#[derive(Debug, Clone, PartialEq)]
pub struct FieldSeds {
    /// The file read.
    pub path: PathBuf,
    /// Bands in the order of the values, sorted by wavelength.
    pub bands: Vec<BandInfo>,
    /// Object ids.
    pub object_id: Vec<String>,
    /// `values[object][band]`.
    pub values: Vec<Vec<BandValue>>,
    /// The key-value metadata of the file (plan, field, bands...).
    pub metadata: Vec<(String, String)>,
}

impl FieldSeds {
    /// Reads `objects.parquet` from the output folder `folder`.
    ///
    /// # Errors
    /// I/O or format errors naming the file; a format error when the
    /// `fluxloom.bands` metadata is missing or a band's columns are absent.
    pub fn read(folder: &Path) -> Result<FieldSeds> {
        let path = folder.join(OBJECTS_FILE);
        let metadata = crate::output::parquet::read_metadata(&path)?;
        let bands_json = metadata
            .iter()
            .find(|(k, _)| k == "fluxloom.bands")
            .map(|(_, v)| v.as_str())
            .ok_or_else(|| Error::format(&path, "no \"fluxloom.bands\" key-value metadata"))?;
        let mut bands: Vec<BandInfo> = serde_json::from_str(bands_json)
            .map_err(|e| Error::format(&path, format!("\"fluxloom.bands\" metadata: {e}")))?;
        bands.sort_by(|a, b| a.wavelength_um.total_cmp(&b.wavelength_um));
        let file = File::open(&path).map_err(|e| Error::io(&path, e))?;
        let reader = ParquetRecordBatchReaderBuilder::try_new(file)
            .map_err(|e| Error::columnar(&path, e))?
            .build()
            .map_err(|e| Error::columnar(&path, e))?;
        let mut batches = Vec::new();
        for b in reader {
            batches.push(b.map_err(|e| Error::columnar(&path, e))?);
        }
        let mut seds = FieldSeds {
            path: path.clone(),
            bands,
            object_id: Vec::new(),
            values: Vec::new(),
            metadata,
        };
        for batch in &batches {
            seds.add_batch(batch)?;
        }
        Ok(seds)
    }

    fn add_batch(&mut self, batch: &RecordBatch) -> Result<()> {
        let ids = strings(batch, "object_id", &self.path)?;
        let n = ids.len();
        let mut per_band: Vec<[Vec<Option<f64>>; 6]> = Vec::new();
        let mut blended: Vec<Vec<bool>> = Vec::new();
        for band in &self.bands {
            let names = [
                "flux_jy",
                "flux_err_jy",
                "ulim_jy",
                "mag",
                "mag_err",
                "ulim_mag",
            ];
            let cols = names.map(|s| floats(batch, &format!("{}_{s}", band.id), &self.path));
            if cols[0].is_none() && cols[3].is_none() {
                return Err(Error::format(
                    &self.path,
                    format!(
                        "band \"{}\" is in the band table but neither column \"{0}_flux_jy\" nor \"{0}_mag\" is in the file",
                        band.id
                    ),
                ));
            }
            per_band.push(cols.map(|c| c.unwrap_or_else(|| vec![None; n])));
            let status = format!("{}_status", band.id);
            blended.push(match batch.column_by_name(&status) {
                Some(_) => strings(batch, &status, &self.path)?
                    .into_iter()
                    .map(|s| s.as_deref() == Some("blended"))
                    .collect(),
                None => vec![false; n],
            });
        }
        for (i, id) in ids.into_iter().enumerate() {
            self.object_id.push(id.unwrap_or_default());
            self.values.push(
                per_band
                    .iter()
                    .zip(&blended)
                    .map(|(c, bl)| BandValue {
                        flux_jy: c[0][i],
                        flux_err_jy: c[1][i],
                        ulim_jy: c[2][i],
                        mag: c[3][i],
                        mag_err: c[4][i],
                        ulim_mag: c[5][i],
                        blended: bl[i],
                    })
                    .collect(),
            );
        }
        Ok(())
    }

    /// Index of band `id`, if the field has it.
    pub fn band_index(&self, id: &str) -> Option<usize> {
        self.bands.iter().position(|b| b.id == id)
    }

    /// A metadata value by key.
    pub fn meta(&self, key: &str) -> Option<&str> {
        self.metadata
            .iter()
            .find(|(k, _)| k == key)
            .map(|(_, v)| v.as_str())
    }
}

fn strings(batch: &RecordBatch, name: &str, path: &Path) -> Result<Vec<Option<String>>> {
    let col = batch
        .column_by_name(name)
        .ok_or_else(|| Error::format(path, format!("no column \"{name}\"")))?;
    let col = arrow::compute::cast(col, &DataType::Utf8).map_err(|e| Error::columnar(path, e))?;
    let s = col.as_string::<i32>();
    Ok((0..s.len())
        .map(|i| s.is_valid(i).then(|| s.value(i).to_string()))
        .collect())
}

fn floats(batch: &RecordBatch, name: &str, path: &Path) -> Option<Vec<Option<f64>>> {
    let col = batch.column_by_name(name)?;
    let col = arrow::compute::cast(col, &DataType::Float64)
        .map_err(|e| Error::columnar(path, e))
        .ok()?;
    let a = col.as_primitive::<Float64Type>();
    Some(
        (0..a.len())
            .map(|i| (a.is_valid(i) && a.value(i).is_finite()).then(|| a.value(i)))
            .collect(),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ks() -> BandInfo {
        BandInfo {
            id: "tmass_ks".into(),
            system: "vega".into(),
            name: "Ks".into(),
            wavelength_um: 2.159,
            zero_point_jy: Some(666.7),
            ..BandInfo::default()
        }
    }

    #[test]
    fn magnitude_from_flux_matches_the_worked_example() {
        // FIELD §7.1: Ks = 10.0 ↔ 66.67 mJy; σ_Ks = 0.03 ↔ σ_F = 1.842 mJy (first order).
        let v = BandValue {
            flux_jy: Some(0.06667),
            flux_err_jy: Some(0.001842),
            ..BandValue::default()
        };
        let (m, e) = v.detected_mag(&ks()).unwrap();
        assert!((m - 10.0).abs() < 1e-9);
        assert!((e.unwrap() - 0.03).abs() < 1e-4);
        let lim = BandValue {
            ulim_jy: Some(0.006667),
            ..BandValue::default()
        };
        assert!((lim.limit_mag(&ks()).unwrap() - 12.5).abs() < 1e-9);
        assert_eq!(lim.detected_mag(&ks()), None);
    }
}
