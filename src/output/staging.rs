//! All-or-nothing output folders.
//!
//! A run writes every output into a hidden staging folder inside the output
//! folder; [`Staging::commit`] moves them to their final names at the end. A run
//! that fails before then leaves the output folder as it was: the staging folder
//! is removed when the [`Staging`] is dropped uncommitted.

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// A staging folder for the files of one run.
pub struct Staging {
    dir: PathBuf,
    target: PathBuf,
    files: Vec<String>,
    committed: bool,
}

impl Staging {
    /// Creates `<target>/.fluxloom-staging-<pid>` (and `target` if missing).
    ///
    /// # Errors
    /// An I/O error naming the folder.
    pub fn new(target: &Path) -> Result<Staging> {
        std::fs::create_dir_all(target).map_err(|e| Error::io(target, e))?;
        let dir = target.join(format!(".fluxloom-staging-{}", std::process::id()));
        if dir.exists() {
            std::fs::remove_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
        }
        std::fs::create_dir(&dir).map_err(|e| Error::io(&dir, e))?;
        Ok(Staging {
            dir,
            target: target.to_path_buf(),
            files: Vec::new(),
            committed: false,
        })
    }

    /// The staging path of output file `name`, recorded for the commit.
    pub fn path(&mut self, name: &str) -> PathBuf {
        self.files.push(name.to_string());
        self.dir.join(name)
    }

    /// The staging folder itself, where staged files can be read back before the commit.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// The final path of output file `name`.
    pub fn final_path(&self, name: &str) -> PathBuf {
        self.target.join(name)
    }

    /// Moves every staged file to its final name and removes the staging folder.
    ///
    /// # Errors
    /// An I/O error naming the file that could not be moved.
    pub fn commit(mut self) -> Result<Vec<PathBuf>> {
        let mut moved = Vec::with_capacity(self.files.len());
        for name in &self.files {
            let to = self.target.join(name);
            std::fs::rename(self.dir.join(name), &to).map_err(|e| Error::io(&to, e))?;
            moved.push(to);
        }
        std::fs::remove_dir_all(&self.dir).map_err(|e| Error::io(&self.dir, e))?;
        self.committed = true;
        Ok(moved)
    }
}

impl Drop for Staging {
    fn drop(&mut self) {
        if !self.committed {
            let _ = std::fs::remove_dir_all(&self.dir);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn commit_moves_and_drop_cleans() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("out");
        let mut s = Staging::new(&out).unwrap();
        std::fs::write(s.path("a.txt"), "a").unwrap();
        assert!(!out.join("a.txt").exists());
        let moved = s.commit().unwrap();
        assert_eq!(moved, vec![out.join("a.txt")]);
        assert_eq!(std::fs::read_dir(&out).unwrap().count(), 1);

        let mut s = Staging::new(&out).unwrap();
        std::fs::write(s.path("b.txt"), "b").unwrap();
        drop(s);
        assert!(!out.join("b.txt").exists());
        assert_eq!(std::fs::read_dir(&out).unwrap().count(), 1);
    }
}
