//! Assembling one SED per object from the matched members' normalized rows,
//! the catalogs' coverage, and the blend relations.

use arrow::array::{Array, AsArray, RecordBatch};
use arrow::datatypes::Float64Type;
use serde::Serialize;

use crate::catalog::schema::BandColumns;
use crate::crossmatch::MatchedObject;
use crate::error::{Error, Result};
use crate::sky::coverage::Coverage;

/// What an SED point is; see the module documentation of [`crate::sed`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
#[repr(u8)]
pub enum SedStatus {
    /// A measurement.
    Detected,
    /// A non-detection with a limit.
    UpperLimit,
    /// Covered, but no source (or the survey reports a non-detection without limit).
    NotDetected,
    /// Outside the catalog's footprint.
    NotCovered,
    /// The catalog's source is a blend over this and other objects.
    Blended,
    /// The source has no value in this band.
    Missing,
    /// Ruled out by a quality rule or an unreadable value.
    Rejected,
    /// The catalog's value is saturated: neither a detection nor an upper
    /// limit. Its value is a lower bound on the flux density (the true flux is
    /// at least that), carried in [`SedPoint::flux_lower`] alone, never in the
    /// detection or upper-limit columns.
    Saturated,
}

impl SedStatus {
    /// All statuses, in report order.
    pub const ALL: [SedStatus; 8] = [
        SedStatus::Detected,
        SedStatus::UpperLimit,
        SedStatus::NotDetected,
        SedStatus::NotCovered,
        SedStatus::Blended,
        SedStatus::Missing,
        SedStatus::Rejected,
        SedStatus::Saturated,
    ];

    /// The text written in status columns.
    pub fn as_str(self) -> &'static str {
        match self {
            SedStatus::Detected => "detected",
            SedStatus::UpperLimit => "upper_limit",
            SedStatus::NotDetected => "not_detected",
            SedStatus::NotCovered => "not_covered",
            SedStatus::Blended => "blended",
            SedStatus::Missing => "missing",
            SedStatus::Rejected => "rejected",
            SedStatus::Saturated => "saturated",
        }
    }

    fn from_normalized(text: &str) -> Option<SedStatus> {
        Some(match text {
            "detected" => SedStatus::Detected,
            "upper_limit" => SedStatus::UpperLimit,
            "not_detected" => SedStatus::NotDetected,
            "missing" => SedStatus::Missing,
            "rejected" => SedStatus::Rejected,
            "saturated" => SedStatus::Saturated,
            _ => return None,
        })
    }
}

/// One band of one catalog: a column group of the SED tables.
#[derive(Debug, Clone)]
pub struct BandSlot {
    /// Catalog index.
    pub catalog: usize,
    /// Catalog name.
    pub catalog_name: String,
    /// The band and how the catalog gives it.
    pub spec: BandColumns,
    /// The catalog's resolution (PSF FWHM), arcsec, when declared.
    pub catalog_resolution_arcsec: Option<f64>,
}

impl BandSlot {
    /// The band id.
    pub fn id(&self) -> &str {
        &self.spec.band.id
    }

    /// The band's resolution: its own, else the catalog's.
    pub fn resolution_arcsec(&self) -> Option<f64> {
        self.spec
            .resolution_arcsec
            .or(self.catalog_resolution_arcsec)
    }

    /// The survey depth in output units (Jy, or magnitudes for a magnitude-only band).
    pub fn depth(&self) -> Option<f64> {
        self.spec.depth.map(|d| self.spec.to_output(d))
    }
}

/// One value of an SED. Values are in Jy, or in magnitudes for a magnitude-only band.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SedPoint {
    /// What the point is.
    pub status: SedStatus,
    /// Flux density (or magnitude) of a detection.
    pub value: Option<f64>,
    /// First-order 1-sigma error (also the noise of an upper limit, when known).
    pub err: Option<f64>,
    /// Lower end of the exact 1-sigma interval.
    pub lo: Option<f64>,
    /// Upper end of the exact 1-sigma interval.
    pub hi: Option<f64>,
    /// Upper limit.
    pub ulim: Option<f64>,
    /// Lower bound on the flux density of a `saturated` point: the saturated
    /// value's flux density, Jy (for a magnitude-only band, its magnitude: the
    /// source is at least this bright). `None` for every other status.
    pub flux_lower: Option<f64>,
}

impl SedPoint {
    fn bare(status: SedStatus) -> SedPoint {
        SedPoint {
            status,
            value: None,
            err: None,
            lo: None,
            hi: None,
            ulim: None,
            flux_lower: None,
        }
    }
}

/// The SED of one object: one point per [`BandSlot`], in slot order.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Sed {
    /// The points.
    pub points: Vec<SedPoint>,
}

/// Typed access to one band's columns in a catalog's normalized table.
struct BandColumnsData<'a> {
    value: &'a arrow::array::PrimitiveArray<Float64Type>,
    err: &'a arrow::array::PrimitiveArray<Float64Type>,
    lo: Option<&'a arrow::array::PrimitiveArray<Float64Type>>,
    hi: Option<&'a arrow::array::PrimitiveArray<Float64Type>>,
    ulim: &'a arrow::array::PrimitiveArray<Float64Type>,
    /// The saturated values (`<band>_sat_jy` or `<band>_sat_mag`), when the
    /// schema has a saturation rule for the band.
    sat: Option<&'a arrow::array::PrimitiveArray<Float64Type>>,
    status: arrow::array::StringArray,
}

fn band_data<'a>(table: &'a RecordBatch, slot: &BandSlot) -> Result<BandColumnsData<'a>> {
    let id = slot.id();
    let origin = format!("normalized table of \"{}\"", slot.catalog_name);
    let f = |suffix: &str| -> Result<&'a arrow::array::PrimitiveArray<Float64Type>> {
        table
            .column_by_name(&format!("{id}_{suffix}"))
            .and_then(|c| c.as_primitive_opt::<Float64Type>())
            .ok_or_else(|| Error::Usage(format!("{origin} lacks column {id}_{suffix}")))
    };
    let status = table
        .column_by_name(&format!("{id}_status"))
        .and_then(|c| arrow::compute::cast(c, &arrow::datatypes::DataType::Utf8).ok())
        .map(|c| c.as_string::<i32>().clone())
        .ok_or_else(|| Error::Usage(format!("{origin} lacks column {id}_status")))?;
    Ok(if slot.spec.has_flux() {
        BandColumnsData {
            value: f("flux_jy")?,
            err: f("flux_err_jy")?,
            lo: Some(f("flux_lo_jy")?),
            hi: Some(f("flux_hi_jy")?),
            ulim: f("ulim_jy")?,
            sat: slot
                .spec
                .saturated
                .as_ref()
                .map(|_| f("sat_jy"))
                .transpose()?,
            status,
        }
    } else {
        BandColumnsData {
            value: f("mag")?,
            err: f("mag_err")?,
            lo: None,
            hi: None,
            ulim: f("ulim_mag")?,
            sat: slot
                .spec
                .saturated
                .as_ref()
                .map(|_| f("sat_mag"))
                .transpose()?,
            status,
        }
    })
}

fn get(a: &arrow::array::PrimitiveArray<Float64Type>, row: usize) -> Option<f64> {
    a.is_valid(row).then(|| a.value(row))
}

impl BandColumnsData<'_> {
    fn point(&self, row: usize) -> SedPoint {
        let status =
            SedStatus::from_normalized(self.status.value(row)).unwrap_or(SedStatus::Rejected);
        SedPoint {
            status,
            value: get(self.value, row),
            err: get(self.err, row),
            lo: self.lo.and_then(|a| get(a, row)),
            hi: self.hi.and_then(|a| get(a, row)),
            ulim: get(self.ulim, row),
            flux_lower: match status {
                SedStatus::Saturated => self.sat.and_then(|a| get(a, row)),
                _ => None,
            },
        }
    }
}

/// Builds the SED of every object.
///
/// `tables[c]` is catalog c's normalized table (rows in the order the match saw
/// them), `coverage[c]` its footprint.
///
/// # Errors
/// A usage error when a normalized table lacks a band's columns.
pub fn assemble(
    slots: &[BandSlot],
    objects: &[MatchedObject],
    tables: &[RecordBatch],
    coverage: &[Coverage],
) -> Result<Vec<Sed>> {
    SedAssembler::new(slots, objects, tables, coverage)?.seds(0..objects.len())
}

/// Builds SEDs for any run of objects, so a build can assemble and write them a
/// chunk at a time.
pub struct SedAssembler<'a> {
    slots: &'a [BandSlot],
    objects: &'a [MatchedObject],
    coverage: &'a [Coverage],
    data: Vec<BandColumnsData<'a>>,
    depths: Vec<Option<f64>>,
}

impl<'a> SedAssembler<'a> {
    /// Prepares the band columns of every slot; see [`assemble`] for the arguments.
    ///
    /// # Errors
    /// A usage error when a normalized table lacks a band's columns.
    pub fn new(
        slots: &'a [BandSlot],
        objects: &'a [MatchedObject],
        tables: &'a [RecordBatch],
        coverage: &'a [Coverage],
    ) -> Result<SedAssembler<'a>> {
        let data: Vec<BandColumnsData> = slots
            .iter()
            .map(|s| band_data(&tables[s.catalog], s))
            .collect::<Result<_>>()?;
        Ok(SedAssembler {
            slots,
            objects,
            coverage,
            data,
            depths: slots.iter().map(BandSlot::depth).collect(),
        })
    }

    /// Whether the blended source at `row` of `slot`'s catalog blends
    /// `slot`'s band: the band's resolution is at least the one the source was
    /// seen at (the finest of the bands it was detected in, as the matcher
    /// takes it; see [`crate::crossmatch::prepare::Sources::resolution_arcsec`]).
    /// A row detected only in a coarse band of its catalog blends that band,
    /// not the catalog's finer ones.
    fn blends_band(&self, slot: &BandSlot, row: usize) -> bool {
        let mut seen_at: Option<Option<f64>> = None;
        for (s, d) in self.slots.iter().zip(&self.data) {
            if s.catalog != slot.catalog {
                continue;
            }
            let status = d.point(row).status;
            if matches!(status, SedStatus::Detected | SedStatus::Saturated) {
                let r = s.resolution_arcsec();
                seen_at = Some(match (seen_at, r) {
                    (None, r) => r,
                    (Some(Some(a)), Some(b)) => Some(a.min(b)),
                    (Some(_), _) => None,
                });
            }
        }
        let source = seen_at.unwrap_or(slot.catalog_resolution_arcsec);
        match (slot.resolution_arcsec(), source) {
            (Some(band), Some(source)) => band >= source,
            // Without declared resolutions every band of a blend is blended.
            (None, None) => true,
            _ => false,
        }
    }

    /// The SEDs of objects `range` (indices into the objects given to [`SedAssembler::new`]).
    ///
    /// # Errors
    /// None at present; kept fallible for callers that stream.
    pub fn seds(&self, range: std::ops::Range<usize>) -> Result<Vec<Sed>> {
        let (slots, objects, coverage) = (self.slots, self.objects, self.coverage);
        let (data, depths) = (&self.data, &self.depths);
        Ok(objects[range]
            .iter()
            .map(|o| {
                let points = slots
                    .iter()
                    .zip(data)
                    .zip(depths)
                    .map(|((slot, d), depth)| {
                        let band_covers = slot
                            .spec
                            .coverage
                            .as_ref()
                            .map(|c| c.contains(o.ra_deg, o.dec_deg));
                        if let Some(m) = o.member(slot.catalog) {
                            let mut p = d.point(m.row);
                            if band_covers == Some(false)
                                && matches!(p.status, SedStatus::NotDetected | SedStatus::Missing)
                            {
                                return SedPoint::bare(SedStatus::NotCovered);
                            }
                            if p.status == SedStatus::NotDetected && p.ulim.is_none() {
                                p.ulim = *depth;
                            }
                            return p;
                        }
                        // A coarse source over this object blends the band only
                        // when it has a measurement in it: where its value is
                        // missing (outside the band's own footprint, say) the
                        // band reads as if no source were there.
                        let blend = o
                            .covered_by
                            .iter()
                            .find(|s| s.catalog as usize == slot.catalog)
                            .filter(|s| self.blends_band(slot, s.row as usize))
                            .map(|s| d.point(s.row as usize))
                            .filter(|source| {
                                !matches!(source.status, SedStatus::Missing | SedStatus::NotCovered)
                            });
                        if let Some(source) = blend {
                            let mut p = SedPoint::bare(SedStatus::Blended);
                            p.ulim = source.value.or(source.ulim);
                            return p;
                        }
                        if band_covers
                            .unwrap_or_else(|| coverage[slot.catalog].contains(o.ra_deg, o.dec_deg))
                        {
                            let mut p = SedPoint::bare(SedStatus::NotDetected);
                            p.ulim = *depth;
                            p
                        } else {
                            SedPoint::bare(SedStatus::NotCovered)
                        }
                    })
                    .collect();
                Sed { points }
            })
            .collect())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalog::normalize::{NormalizeOptions, Normalizer};
    use crate::catalog::schema::SurveySchema;
    use crate::photometry::BandLibrary;
    use std::path::Path;
    use std::sync::Arc;

    #[test]
    fn a_saturated_value_is_a_lower_bound_neither_a_detection_nor_a_limit_in_the_sed() {
        let text = "survey = \"cat\"\nformat = \"csv\"\nid = \"id\"\n[position]\nra = \"ra\"\ndec = \"dec\"\nerror = { kind = \"fixed\", arcsec = 0.1 }\n[epoch]\nyear = 2010.0\n[[band]]\nband = \"irac_36\"\nvalue = \"f\"\nunit = \"mJy\"\nerror = \"e\"\nsaturated = { column = \"fl\", bit = 2 }\n";
        let schema =
            SurveySchema::from_str(text, Path::new("s.toml"), &BandLibrary::builtin()).unwrap();
        let col = |v: &[&str]| {
            Arc::new(arrow::array::StringArray::from(v.to_vec())) as arrow::array::ArrayRef
        };
        let batch = RecordBatch::try_from_iter([
            ("id", col(&["a", "b"])),
            ("ra", col(&["1.0", "1.1"])),
            ("dec", col(&["2.0", "2.0"])),
            ("f", col(&["900.0", "2.0"])),
            ("e", col(&["0.1", "0.1"])),
            ("fl", col(&["4", "0"])),
        ])
        .unwrap();
        let normalized = Normalizer::new(&schema, Path::new("c.csv"), NormalizeOptions::default())
            .normalize(&batch)
            .unwrap();
        let slot = BandSlot {
            catalog: 0,
            catalog_name: "cat".into(),
            spec: schema.bands[0].clone(),
            catalog_resolution_arcsec: None,
        };
        let data = band_data(&normalized, &slot).unwrap();
        let saturated = data.point(0);
        // 900 mJy = 0.9 Jy, as a lower bound only.
        assert_eq!(
            saturated,
            SedPoint {
                flux_lower: Some(0.9),
                ..SedPoint::bare(SedStatus::Saturated)
            }
        );
        assert_eq!(saturated.status.as_str(), "saturated");
        let detected = data.point(1);
        assert_eq!(detected.status, SedStatus::Detected);
        assert!((detected.value.unwrap() - 0.002).abs() < 1e-15);
        assert_eq!(detected.flux_lower, None);
    }
}
