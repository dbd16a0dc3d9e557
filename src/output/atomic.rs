//! Atomic file creation: write under a temporary name beside the target, then
//! rename, so a failed or interrupted run never leaves a half-written file under
//! the final name.
//!
//! [`AtomicFile`] removes its temporary file when dropped without
//! [`AtomicFile::commit`].

use std::fs::File;
use std::io::BufWriter;
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// A file being written under a temporary name, renamed into place on commit.
pub struct AtomicFile {
    temp_path: PathBuf,
    final_path: PathBuf,
    committed: bool,
}

impl AtomicFile {
    /// Creates the temporary file `.<name>.partial-<pid>` beside `path` (and the
    /// folder, if missing), returning the guard and a buffered writer to it.
    ///
    /// # Errors
    /// An I/O error naming the folder if the file cannot be created.
    pub fn create(path: &Path) -> Result<(AtomicFile, BufWriter<File>)> {
        let name = path
            .file_name()
            .ok_or_else(|| Error::Usage(format!("{}: not a file name", path.display())))?;
        let temp_path = path.with_file_name(format!(
            ".{}.partial-{}",
            name.to_string_lossy(),
            std::process::id()
        ));
        if let Some(parent) = path.parent().filter(|p| !p.as_os_str().is_empty()) {
            std::fs::create_dir_all(parent).map_err(|e| Error::io(parent, e))?;
        }
        let file = File::create(&temp_path).map_err(|e| Error::io(&temp_path, e))?;
        Ok((
            AtomicFile {
                temp_path,
                final_path: path.to_path_buf(),
                committed: false,
            },
            BufWriter::with_capacity(1 << 20, file),
        ))
    }

    /// The final path.
    pub fn path(&self) -> &Path {
        &self.final_path
    }

    /// Renames the temporary file to the final name (the writer must be flushed and closed).
    ///
    /// # Errors
    /// An I/O error if the rename fails; the temporary file is then removed.
    pub fn commit(mut self) -> Result<()> {
        std::fs::rename(&self.temp_path, &self.final_path)
            .map_err(|e| Error::io(&self.final_path, e))?;
        self.committed = true;
        Ok(())
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        if !self.committed {
            let _ = std::fs::remove_file(&self.temp_path);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write;

    #[test]
    fn commit_renames_and_drop_removes() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("out.txt");
        let (guard, mut w) = AtomicFile::create(&target).unwrap();
        w.write_all(b"hello").unwrap();
        drop(w);
        assert!(!target.exists());
        guard.commit().unwrap();
        assert_eq!(std::fs::read_to_string(&target).unwrap(), "hello");

        let other = dir.path().join("never.txt");
        let (guard, mut w) = AtomicFile::create(&other).unwrap();
        w.write_all(b"half").unwrap();
        drop(w);
        drop(guard);
        assert!(!other.exists());
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }
}
