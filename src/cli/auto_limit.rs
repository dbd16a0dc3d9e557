//! Whether a build without `--memory-limit` would fit in memory, and the limit
//! to build within when it would not.
//!
//! A build holding everything takes about [`BYTES_PER_ROW_HELD`] per input row
//! at its peak. The rows are counted from a Parquet file's footer, and
//! estimated from the size of any other file (generously: few catalog rows
//! take less than [`TEXT_BYTES_PER_ROW`] bytes of text). When the estimate
//! exceeds half of the memory the system reports available, the build runs
//! within a limit of that half instead, and says so; its files are those of a
//! build holding everything (the bounded-memory build is tested to write them).

use std::path::Path;

use crate::catalog::schema::FileFormat;
use crate::plan::Plan;

/// Peak bytes per input row of a build holding everything (measured on the
/// versus benchmark: 675 B with one band per catalog, 1 kB with four).
pub const BYTES_PER_ROW_HELD: u64 = 1024;

/// Bytes of text per row assumed for delimited text, FITS and VOTable files.
const TEXT_BYTES_PER_ROW: u64 = 40;

/// Compression assumed for gzip files when estimating their rows.
const GZIP_RATIO: u64 = 4;

/// Smallest limit chosen, bytes.
const MIN_LIMIT_BYTES: u64 = 512 << 20;

/// Environment variable that states the available memory (e.g. `64M`) instead
/// of the system's figure, so that the choice can be tried on small inputs.
pub const AVAILABLE_VARIABLE: &str = "FLUXLOOM_MEMORY_AVAILABLE";

/// The automatic choice: build within `limit_bytes`, because the inputs' `rows`
/// would need `needed_bytes` held at once against `available_bytes`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AutoLimit {
    /// Estimated input rows.
    pub rows: u64,
    /// Estimated peak of a build holding everything, bytes.
    pub needed_bytes: u64,
    /// Memory available, bytes.
    pub available_bytes: u64,
    /// The limit chosen, bytes.
    pub limit_bytes: u64,
}

impl AutoLimit {
    /// The summary line that tells the user.
    pub fn summary_line(&self) -> String {
        let gb = |b: u64| b as f64 / (1u64 << 30) as f64;
        format!(
            "memory   about {} input rows would need about {:.1} GB held at once, more than half of the {:.1} GB available: built within a limit of {:.1} GB (choose one with --memory-limit)\n",
            self.rows,
            gb(self.needed_bytes),
            gb(self.available_bytes),
            gb(self.limit_bytes)
        )
    }
}

/// The limit to build `plan` within when no `--memory-limit` is given, or
/// `None` when the build fits in half of the available memory (or the system
/// does not say how much is available).
///
/// # Errors
/// A memory size in [`AVAILABLE_VARIABLE`] that does not parse.
pub fn automatic_limit(plan: &Plan) -> crate::error::Result<Option<AutoLimit>> {
    let available = match std::env::var(AVAILABLE_VARIABLE) {
        Ok(text) => Some(
            super::stream::parse_memory_size(&text)
                .map_err(|e| crate::error::Error::Usage(format!("{AVAILABLE_VARIABLE}: {e}")))?,
        ),
        Err(_) => crate::memory::available_bytes(),
    };
    let Some(available_bytes) = available else {
        return Ok(None);
    };
    let rows: u64 = plan
        .catalogs
        .iter()
        .map(|c| estimated_rows(&c.file, &c.schema.format))
        .sum();
    Ok(choose(rows, available_bytes))
}

/// The choice for `rows` input rows and `available_bytes` of memory.
fn choose(rows: u64, available_bytes: u64) -> Option<AutoLimit> {
    let needed_bytes = rows.saturating_mul(BYTES_PER_ROW_HELD);
    let half = available_bytes / 2;
    (needed_bytes > half).then(|| AutoLimit {
        rows,
        needed_bytes,
        available_bytes,
        limit_bytes: half.max(MIN_LIMIT_BYTES),
    })
}

/// The rows of a catalog file: a Parquet footer's count, else from its size
/// (0 when the file cannot be read: the build then names the problem).
fn estimated_rows(path: &Path, format: &FileFormat) -> u64 {
    let bytes = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
    if matches!(format, FileFormat::Parquet) {
        let footer = std::fs::File::open(path).ok().and_then(|f| {
            parquet::file::reader::SerializedFileReader::new(f)
                .ok()
                .map(|r| {
                    use parquet::file::reader::FileReader;
                    r.metadata().file_metadata().num_rows().max(0) as u64
                })
        });
        if let Some(rows) = footer {
            return rows;
        }
    }
    let gzip = path.extension().is_some_and(|e| e == "gz");
    bytes * if gzip { GZIP_RATIO } else { 1 } / TEXT_BYTES_PER_ROW
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_build_that_fits_in_half_the_memory_keeps_everything() {
        // 1e6 rows need about 1 GB: they fit in 4 GB available, not in 1.5 GB.
        assert_eq!(choose(1_000_000, 4 << 30), None);
        let auto = choose(1_000_000, 3 << 29).unwrap();
        assert_eq!(auto.needed_bytes, 1_024_000_000);
        assert_eq!(auto.limit_bytes, 3 << 28);
        // The limit never goes below 512 MB.
        assert_eq!(choose(1_000_000, 100 << 20).unwrap().limit_bytes, 512 << 20);
        assert!(auto.summary_line().contains(
            "about 1000000 input rows would need about 1.0 GB held at once, more than half of the 1.5 GB available: built within a limit of 0.8 GB"
        ));
    }

    #[test]
    fn rows_come_from_the_parquet_footer_or_the_file_size() {
        let demo = Path::new("demo_catalogs/fl1");
        // The demo's ask catalog: 426 rows (its README and tests count them).
        assert_eq!(
            estimated_rows(&demo.join("ask.parquet"), &FileFormat::Parquet),
            426
        );
        let fits = demo.join("harrier.fits");
        let size = std::fs::metadata(&fits).unwrap().len();
        assert_eq!(
            estimated_rows(&fits, &FileFormat::Fits { hdu: None }),
            size / 40
        );
        assert_eq!(
            estimated_rows(Path::new("no/such/file.csv"), &FileFormat::Parquet),
            0
        );
    }
}
