//! The restart journal: the output of every finished sky cell, kept beside the
//! output folder until the run commits, so that a killed run resumes from the
//! cells it had finished.
//!
//! A build into `out/fl1` journals into `out/.fl1.fluxloom-journal/`: a `key`
//! file (a SHA-256 of everything the cells' outputs depend on: the fluxloom
//! version, the plan text, the bytes of every input, the cell order and the
//! cell subset) and one file per finished cell, `cell-<order>-<index>.arrows`
//! (the two IPC streams of [`crate::crossmatch::cell_io::write_output`]), each
//! written to a temporary name and renamed, so a file that exists is whole.
//! Cell files are not flushed to disk one by one (a flush per cell cost
//! 11 % of a 1e6 × 1e6 links-only build): a killed process leaves them
//! whole in the page cache, and after a system crash, when a renamed file may
//! be cut short, [`Journal::cells`] reads each file whole before trusting it
//! and drops one it cannot read, so that cell is matched again.
//! A run whose key differs clears the journal first. A cell's output does not
//! depend on the margin it was finally matched with, so a resumed run takes it
//! as it is; its files are therefore identical to an uninterrupted run's.
//! The journal is removed once the output folder commits.

use std::collections::BTreeMap;
use std::io::{BufReader, BufWriter, Write};
use std::path::{Path, PathBuf};

use crate::crossmatch::cell_io::{read_output, write_output};
use crate::crossmatch::cells::CellOutput;
use crate::error::{Error, Result};

/// The journal of one output folder.
pub struct Journal {
    dir: PathBuf,
    order: u8,
}

impl Journal {
    /// The journal folder of the output folder `target`.
    ///
    /// # Errors
    /// [`Error::Usage`] when `target` has no folder name.
    pub fn folder_of(target: &Path) -> Result<PathBuf> {
        let name = target
            .file_name()
            .ok_or_else(|| Error::Usage(format!("{}: not a folder name", target.display())))?;
        Ok(target.with_file_name(format!(".{}.fluxloom-journal", name.to_string_lossy())))
    }

    /// Opens (or starts) the journal of `target` for a run with `key` at cell
    /// order `order`; a journal of another key is cleared.
    ///
    /// # Errors
    /// [`Error::Io`] when the folder cannot be read, cleared or created.
    pub fn open(target: &Path, key: &str, order: u8) -> Result<Journal> {
        let dir = Journal::folder_of(target)?;
        let key_file = dir.join("key");
        let same = std::fs::read_to_string(&key_file).is_ok_and(|k| k.trim() == key);
        if !same {
            if dir.exists() {
                std::fs::remove_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
            }
            std::fs::create_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
            std::fs::write(&key_file, format!("{key}\n")).map_err(|e| Error::io(&key_file, e))?;
        }
        Ok(Journal { dir, order })
    }

    fn cell_file(&self, id: u64) -> PathBuf {
        self.dir.join(format!("cell-{}-{id}.arrows", self.order))
    }

    /// The indices of the cells finished so far, ascending: those whose file
    /// reads whole. A file that does not (cut short by a system crash) is
    /// removed, so its cell counts as not finished.
    ///
    /// # Errors
    /// [`Error::Io`] when the journal folder cannot be read, or an unreadable
    /// cell file cannot be removed.
    pub fn cells(&self) -> Result<Vec<u64>> {
        let prefix = format!("cell-{}-", self.order);
        let mut found = Vec::new();
        let entries = std::fs::read_dir(&self.dir).map_err(|e| Error::io(&self.dir, e))?;
        for entry in entries {
            let entry = entry.map_err(|e| Error::io(&self.dir, e))?;
            let name = entry.file_name().to_string_lossy().into_owned();
            if let Some(id) = name
                .strip_prefix(&prefix)
                .and_then(|n| n.strip_suffix(".arrows"))
                .and_then(|n| n.parse::<u64>().ok())
            {
                found.push(id);
            }
        }
        found.sort_unstable();
        let mut whole = Vec::with_capacity(found.len());
        for id in found {
            if self.read(id).is_ok() {
                whole.push(id);
            } else {
                let path = self.cell_file(id);
                std::fs::remove_file(&path).map_err(|e| Error::io(&path, e))?;
            }
        }
        Ok(whole)
    }

    /// The output of finished cell `id`.
    ///
    /// # Errors
    /// [`Error::Io`] / [`Error::Format`] naming the journal file if it cannot be read.
    pub fn read(&self, id: u64) -> Result<CellOutput> {
        let path = self.cell_file(id);
        let file = std::fs::File::open(&path).map_err(|e| Error::io(&path, e))?;
        read_output(BufReader::new(file), &path)
    }

    /// The outputs of the cells finished so far, by cell index.
    ///
    /// # Errors
    /// [`Error::Io`] / [`Error::Format`] naming a journal file that cannot be read.
    pub fn finished(&self) -> Result<BTreeMap<u64, CellOutput>> {
        self.cells()?
            .into_iter()
            .map(|id| Ok((id, self.read(id)?)))
            .collect()
    }

    /// Records the output of cell `id`.
    ///
    /// # Errors
    /// [`Error::Io`] when the file cannot be written.
    pub fn record(&self, id: u64, out: &CellOutput) -> Result<()> {
        let path = self.cell_file(id);
        let partial = path.with_extension("partial");
        let file = std::fs::File::create(&partial).map_err(|e| Error::io(&partial, e))?;
        let mut w = BufWriter::new(file);
        write_output(&mut w, out, &path)?;
        w.flush().map_err(|e| Error::io(&partial, e))?;
        w.into_inner()
            .map_err(|e| Error::io(&partial, e.into_error()))?;
        std::fs::rename(&partial, &path).map_err(|e| Error::io(&path, e))
    }

    /// Removes the journal (after the output folder committed).
    ///
    /// # Errors
    /// [`Error::Io`] when it cannot be removed.
    pub fn remove(self) -> Result<()> {
        std::fs::remove_dir_all(&self.dir).map_err(|e| Error::io(&self.dir, e))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A scratch folder named after `test`, an output folder inside it, and a
    /// journal of key "one" for it holding cell 17.
    fn journal_with_cell_17(test: &str) -> (PathBuf, PathBuf, Journal, CellOutput) {
        let tmp = std::env::temp_dir().join(format!("fluxloom-{test}-{}", std::process::id()));
        let target = tmp.join("fl1");
        std::fs::create_dir_all(&tmp).unwrap();
        let j = Journal::open(&target, "one", 5).unwrap();
        let out = CellOutput {
            groups: 3,
            ..CellOutput::default()
        };
        j.record(17, &out).unwrap();
        (tmp, target, j, out)
    }

    #[test]
    fn a_cell_file_cut_short_counts_as_not_finished() {
        let (tmp, _, j, out) = journal_with_cell_17("journal-cut");
        j.record(18, &out).unwrap();
        let path = j.cell_file(18);
        let bytes = std::fs::read(&path).unwrap();
        std::fs::write(&path, &bytes[..bytes.len() / 2]).unwrap();
        assert_eq!(j.cells().unwrap(), [17]);
        assert!(!path.exists());
        assert_eq!(j.finished().unwrap(), BTreeMap::from([(17, out)]));
        std::fs::remove_dir_all(&tmp).unwrap();
    }

    #[test]
    fn a_journal_of_another_key_is_cleared() {
        let (tmp, target, _, out) = journal_with_cell_17("journal-key");
        let again = Journal::open(&target, "one", 5).unwrap();
        assert_eq!(again.finished().unwrap(), BTreeMap::from([(17, out)]));
        let other = Journal::open(&target, "two", 5).unwrap();
        assert!(other.finished().unwrap().is_empty());
        other.remove().unwrap();
        assert!(!Journal::folder_of(&target).unwrap().exists());
        std::fs::remove_dir_all(&tmp).unwrap();
    }
}
