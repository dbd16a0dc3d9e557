//! What normalizing a catalog found: rows read, kept and skipped by reason,
//! band measurements by status, rejections by reason, and the first problems.

use std::collections::BTreeMap;

use serde::Serialize;

/// The status of one band measurement of one source.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
#[repr(u8)]
pub enum BandStatus {
    /// A measurement with flux density (and error when given).
    Detected,
    /// Not detected; an upper limit on the flux density is given.
    UpperLimit,
    /// The survey says it did not detect the source, and gives no limit value.
    NotDetected,
    /// No value at all (empty, null or a null sentinel).
    Missing,
    /// A value was present but a quality rule or a parse failure rejected it.
    Rejected,
    /// The schema's saturation rule marks the value: kept apart, neither a
    /// detection nor a limit.
    Saturated,
}

impl BandStatus {
    /// All statuses, in report order.
    pub const ALL: [BandStatus; 6] = [
        BandStatus::Detected,
        BandStatus::UpperLimit,
        BandStatus::NotDetected,
        BandStatus::Missing,
        BandStatus::Rejected,
        BandStatus::Saturated,
    ];

    /// The text written in `<band>_status` columns.
    pub fn as_str(self) -> &'static str {
        match self {
            BandStatus::Detected => "detected",
            BandStatus::UpperLimit => "upper_limit",
            BandStatus::NotDetected => "not_detected",
            BandStatus::Missing => "missing",
            BandStatus::Rejected => "rejected",
            BandStatus::Saturated => "saturated",
        }
    }
}

/// Counts for one band.
#[derive(Debug, Clone, Default)]
pub struct BandCounts {
    /// Band id.
    pub band: String,
    /// Measurements per status, in [`BandStatus::ALL`] order.
    pub by_status: [u64; BandStatus::ALL.len()],
    /// Rejections per reason.
    pub rejected_by: BTreeMap<String, u64>,
}

impl BandCounts {
    /// The count for one status.
    pub fn count(&self, status: BandStatus) -> u64 {
        self.by_status[status as usize]
    }

    /// Counts one more measurement of `status`.
    #[inline]
    pub fn add(&mut self, status: BandStatus) {
        self.by_status[status as usize] += 1;
    }
}

impl Serialize for BandCounts {
    fn serialize<S: serde::Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        use serde::ser::SerializeStruct;
        let by_status: BTreeMap<&str, u64> = BandStatus::ALL
            .iter()
            .map(|s| (s.as_str(), self.count(*s)))
            .collect();
        let mut st = serializer.serialize_struct("BandCounts", 3)?;
        st.serialize_field("band", &self.band)?;
        st.serialize_field("by_status", &by_status)?;
        st.serialize_field("rejected_by", &self.rejected_by)?;
        st.end()
    }
}

/// One problem found in the file, for showing to the user.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Problem {
    /// Data row, from 1.
    pub row: u64,
    /// Column name.
    pub column: String,
    /// What was expected.
    pub expected: String,
    /// The original text found.
    pub found: String,
    /// What was done about it: "row skipped" or "band rejected".
    pub action: String,
}

/// The summary of one normalized catalog.
#[derive(Debug, Clone, Default, Serialize)]
pub struct NormalizeReport {
    /// Catalog (survey) name.
    pub survey: String,
    /// Data rows read from the file.
    pub rows_read: u64,
    /// Rows written to the normalized table.
    pub rows_kept: u64,
    /// Skipped rows per reason (only with skipping enabled).
    pub rows_skipped: BTreeMap<String, u64>,
    /// Per-band counts, in schema order.
    pub bands: Vec<BandCounts>,
    /// The first problems met, at most [`NormalizeReport::MAX_PROBLEMS`].
    pub problems: Vec<Problem>,
    /// Total number of problems met (may exceed the examples kept).
    pub problem_count: u64,
    /// Per flag column read by character position: the longest value met
    /// (characters, text), to check the positions against the data.
    #[serde(skip)]
    pub(super) flag_longest: Vec<(String, Option<(usize, String)>)>,
}

impl NormalizeReport {
    /// How many example problems are kept.
    pub const MAX_PROBLEMS: usize = 20;

    /// Total skipped rows.
    pub fn rows_skipped_total(&self) -> u64 {
        self.rows_skipped.values().sum()
    }

    /// Adds the counts of a later part of the same file.
    pub(super) fn absorb(&mut self, part: NormalizeReport) {
        self.rows_read += part.rows_read;
        self.rows_kept += part.rows_kept;
        for (reason, count) in part.rows_skipped {
            *self.rows_skipped.entry(reason).or_insert(0) += count;
        }
        for (mine, theirs) in self.bands.iter_mut().zip(part.bands) {
            for (a, b) in mine.by_status.iter_mut().zip(theirs.by_status) {
                *a += b;
            }
            for (reason, count) in theirs.rejected_by {
                *mine.rejected_by.entry(reason).or_insert(0) += count;
            }
        }
        for ((_, mine), (_, theirs)) in self.flag_longest.iter_mut().zip(part.flag_longest) {
            if let Some((n, text)) = theirs
                && mine.as_ref().is_none_or(|(m, _)| n > *m)
            {
                *mine = Some((n, text));
            }
        }
        let total = self.problem_count + part.problem_count;
        for p in part.problems {
            self.record_problem(p);
        }
        self.problem_count = total;
    }

    pub(super) fn record_problem(&mut self, problem: Problem) {
        self.problem_count += 1;
        if self.problems.len() < Self::MAX_PROBLEMS {
            self.problems.push(problem);
        }
    }
}
