//! Bounds on what a catalog header may declare, checked before anything is allocated.
//!
//! A header's sizes are claims, not facts: a flipped byte can turn a row width of
//! 66 bytes into 10^12. Every reader compares each declared size with what the
//! file can hold (its length, or for a compressed stream the most its
//! decompressed bytes can be), and sizes its buffers by the caps below, so a
//! hostile file gives an error instead of an aborted process.

use std::path::Path;

use crate::error::{Error, Result};

/// Largest ratio of decompressed to compressed bytes of a deflate stream:
/// 1032 (258-byte matches coded in about 2 bits; zlib's technical notes, from memory).
pub const DEFLATE_MAX_RATIO: u64 = 1032;

/// Most bytes of raw rows decoded into one record batch (64 MiB); batches hold
/// fewer rows when rows are wide.
pub const MAX_BATCH_BYTES: usize = 64 << 20;

/// Most values (array elements counted one by one) held in one record batch.
pub const MAX_BATCH_VALUES: usize = 1 << 24;

/// Most elements in one array cell of a table (2^20), far above any catalog
/// column and small enough that a cell always fits in memory.
pub const MAX_CELL_ELEMENTS: usize = 1 << 20;

/// Most 2880-byte blocks in one FITS header (1000 blocks: 36,000 cards).
pub const MAX_HEADER_BLOCKS: usize = 1000;

/// The most bytes a stream can yield: a plain file's length, or for a gzip file
/// of `len` bytes `len * DEFLATE_MAX_RATIO`.
pub fn stream_bound(len: u64, gzip: bool) -> u64 {
    if gzip {
        len.saturating_mul(DEFLATE_MAX_RATIO)
    } else {
        len
    }
}

/// Rows per batch for rows of `row_bytes` bytes: at most `wanted`, at least 1,
/// and no more than fit in [`MAX_BATCH_BYTES`].
pub fn batch_rows_for(wanted: usize, row_bytes: usize) -> usize {
    let fit = MAX_BATCH_BYTES / row_bytes.max(1);
    wanted.min(fit).max(1)
}

/// A zeroed buffer of `n` bytes, or an error naming the file when memory cannot be had.
///
/// # Errors
/// [`Error::Format`] when the allocation fails.
pub fn zeroed(path: &Path, n: usize) -> Result<Vec<u8>> {
    let mut buf = Vec::new();
    buf.try_reserve_exact(n).map_err(|_| {
        Error::format(
            path,
            format!("cannot allocate {n} bytes for the rows the header declares"),
        )
    })?;
    buf.resize(n, 0);
    Ok(buf)
}

/// `text` on one line: control characters (newlines included) written as escapes,
/// so that a message quoting a file's bytes stays one line.
pub fn one_line(text: &str) -> String {
    text.chars()
        .map(|c| {
            if c.is_control() {
                c.escape_default().to_string()
            } else {
                c.to_string()
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn control_characters_are_escaped() {
        assert_eq!(one_line("a\nb\tc\u{0}d é"), "a\\nb\\tc\\u{0}d é");
    }

    #[test]
    fn batches_shrink_for_wide_rows() {
        assert_eq!(batch_rows_for(65_536, 100), 65_536);
        assert_eq!(batch_rows_for(65_536, 1 << 20), 64);
        assert_eq!(batch_rows_for(65_536, 1 << 40), 1);
        assert_eq!(batch_rows_for(0, 10), 1);
    }

    #[test]
    fn a_gzip_stream_is_bounded_by_the_deflate_ratio() {
        assert_eq!(stream_bound(100, false), 100);
        assert_eq!(stream_bound(100, true), 103_200);
        assert_eq!(stream_bound(u64::MAX, true), u64::MAX);
    }
}
