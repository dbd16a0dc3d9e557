//! All-or-nothing output folders: the whole set of a run replaces the old set.
//!
//! A run into the output folder `out/fl1` stages every file in the sibling
//! folder `out/.fl1.fluxloom-new-<pid>` (a real folder holding our files and
//! the marker file `.fluxloom-staging`, locked while the run lives). On
//! [`Staging::commit`] the staged files are flushed to disk and the completion
//! marker `.fluxloom-complete` (the list of files of the set) is written;
//! then the folders are swapped by renames:
//!
//! 1. `out/fl1` (if present) is renamed to `out/.fl1.fluxloom-old-<pid>`;
//! 2. `out/.fl1.fluxloom-new-<pid>` is renamed to `out/fl1`;
//! 3. `out/.fl1.fluxloom-old-<pid>` is removed.
//!
//! **Guarantee.** After a kill at any moment, `out/fl1` holds either the
//! whole old set or the whole new set, except between the renames of steps 1
//! and 2, when it is missing and both sets are complete beside it. The next
//! run into the same output ([`Staging::new`], which calls [`recover`]) first
//! repairs that state (a complete staged set is moved in; failing that, the
//! old set is moved back), then removes the stale staging of earlier runs.
//! Only our folders are removed: those named `.<name>.fluxloom-new-<pid>` or
//! `.<name>.fluxloom-old-<pid>` that hold the marker `.fluxloom-staging` and
//! whose lock no living run holds, and (inside the output folder) the
//! `.fluxloom-staging-<pid>` folders of earlier fluxloom versions.
//!
//! Because the folder is replaced as a whole, an output folder holding files
//! fluxloom did not write is refused rather than replaced. Two runs into the
//! same output folder at the same time are not supported.

use std::fs::File;
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// Marker file of a staging folder (and of a committed output folder).
pub const STAGING_MARKER: &str = ".fluxloom-staging";
/// Completion marker: written, listing the set's files, once every file is on disk.
pub const COMPLETE_MARKER: &str = ".fluxloom-complete";
/// Output names written by fluxloom versions that had no completion marker.
const LEGACY_NAMES: [&str; 10] = [
    "objects.parquet",
    "photometry.parquet",
    "links.parquet",
    "objects.csv",
    "photometry.csv",
    "objects.fits",
    "photometry.fits",
    "objects.vot",
    "photometry.vot",
    "run.json",
];

/// A staging folder for the files of one run.
pub struct Staging {
    dir: PathBuf,
    target: PathBuf,
    files: Vec<String>,
    committed: bool,
    /// The locked marker file; the lock tells other runs this staging is alive.
    _lock: File,
}

/// The kinds of sibling folders a run creates.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Kind {
    New,
    Old,
}

impl Kind {
    fn tag(self) -> &'static str {
        match self {
            Kind::New => "new",
            Kind::Old => "old",
        }
    }
}

/// The sibling folder of `target` of `kind` for process `pid`.
fn sibling(target: &Path, kind: Kind, pid: u32) -> Result<PathBuf> {
    let name = target
        .file_name()
        .ok_or_else(|| Error::Usage(format!("{}: not a folder name", target.display())))?;
    Ok(target.with_file_name(format!(
        ".{}.fluxloom-{}-{pid}",
        name.to_string_lossy(),
        kind.tag()
    )))
}

/// The parent folder of `target` ("." for a bare name).
fn parent(target: &Path) -> PathBuf {
    match target.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

/// Our sibling folders of `target`: kind, pid and path, for folders with the marker.
fn siblings(target: &Path) -> Result<Vec<(Kind, u32, PathBuf)>> {
    let Some(name) = target.file_name().map(|n| n.to_string_lossy().into_owned()) else {
        return Ok(Vec::new());
    };
    let dir = parent(target);
    let entries = match std::fs::read_dir(&dir) {
        Ok(e) => e,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Vec::new()),
        Err(e) => return Err(Error::io(&dir, e)),
    };
    let mut found = Vec::new();
    for entry in entries {
        let entry = entry.map_err(|e| Error::io(&dir, e))?;
        let file_name = entry.file_name().to_string_lossy().into_owned();
        for kind in [Kind::New, Kind::Old] {
            let prefix = format!(".{name}.fluxloom-{}-", kind.tag());
            if let Some(pid) = file_name
                .strip_prefix(&prefix)
                .and_then(|p| p.parse::<u32>().ok())
            {
                let path = entry.path();
                if path.is_dir() && path.join(STAGING_MARKER).is_file() {
                    found.push((kind, pid, path));
                }
            }
        }
    }
    found.sort_by(|a, b| a.2.cmp(&b.2));
    Ok(found)
}

/// Whether a living run holds the lock of the staging folder `dir`.
fn is_alive(dir: &Path) -> bool {
    match File::options().write(true).open(dir.join(STAGING_MARKER)) {
        Ok(f) => matches!(f.try_lock(), Err(std::fs::TryLockError::WouldBlock)),
        Err(_) => false,
    }
}

/// Repairs an output folder left by a killed run and removes stale staging.
///
/// When `target` is missing and a complete staged set (with
/// [`COMPLETE_MARKER`]) of a dead run lies beside it, that set is renamed
/// into place; failing that, an old set moved aside is renamed back. Then
/// every other staging folder of dead runs is removed, as are the
/// `.fluxloom-staging-<pid>` folders of earlier versions inside `target`.
/// Returns the folders removed.
///
/// # Errors
/// An I/O error naming the folder that could not be renamed or removed.
pub fn recover(target: &Path) -> Result<Vec<PathBuf>> {
    let stale: Vec<(Kind, u32, PathBuf)> = siblings(target)?
        .into_iter()
        .filter(|(_, _, p)| !is_alive(p))
        .collect();
    let mut used: Option<PathBuf> = None;
    if !target.exists() {
        let complete = stale
            .iter()
            .find(|(k, _, p)| *k == Kind::New && p.join(COMPLETE_MARKER).is_file());
        let old = stale.iter().find(|(k, _, _)| *k == Kind::Old);
        if let Some((_, _, from)) = complete.or(old) {
            std::fs::rename(from, target).map_err(|e| Error::io(target, e))?;
            used = Some(from.clone());
        }
    }
    let mut removed = Vec::new();
    for (_, _, path) in stale {
        if used.as_ref() != Some(&path) {
            std::fs::remove_dir_all(&path).map_err(|e| Error::io(&path, e))?;
            removed.push(path);
        }
    }
    if let Ok(entries) = std::fs::read_dir(target) {
        for entry in entries.flatten() {
            let path = entry.path();
            if is_legacy_staging(&path) {
                std::fs::remove_dir_all(&path).map_err(|e| Error::io(&path, e))?;
                removed.push(path);
            }
        }
    }
    Ok(removed)
}

/// A `.fluxloom-staging-<pid>` folder of an earlier version: only output files inside.
fn is_legacy_staging(path: &Path) -> bool {
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned());
    let Some(pid) = name
        .as_deref()
        .and_then(|n| n.strip_prefix(".fluxloom-staging-"))
    else {
        return false;
    };
    if pid.parse::<u32>().is_err() || !path.is_dir() {
        return false;
    }
    std::fs::read_dir(path).is_ok_and(|entries| {
        entries.flatten().all(|e| {
            let n = e.file_name().to_string_lossy().into_owned();
            e.path().is_file() && (LEGACY_NAMES.contains(&n.as_str()) || is_partial(&n))
        })
    })
}

/// `.<output name>.partial-<pid>`, a temporary file of [`super::atomic::AtomicFile`].
fn is_partial(name: &str) -> bool {
    name.strip_prefix('.')
        .and_then(|n| n.rsplit_once(".partial-"))
        .is_some_and(|(file, pid)| LEGACY_NAMES.contains(&file) && pid.parse::<u32>().is_ok())
}

/// Files that fluxloom's commands add to a committed output folder afterwards
/// (`report`, `science`): they go with the folder like its own files.
const ADDED_BY_COMMANDS: [&str; 3] = ["report.html", "report.json", "science.parquet"];

/// Whether `path` is the `figures` folder `draw` writes by default: only SVG
/// and PNG files in it.
fn is_figures_folder(path: &Path) -> bool {
    path.file_name().is_some_and(|n| n == "figures")
        && std::fs::read_dir(path).is_ok_and(|entries| {
            entries.into_iter().all(|e| {
                e.is_ok_and(|e| {
                    let name = e.file_name().to_string_lossy().into_owned();
                    e.path().is_file() && (name.ends_with(".svg") || name.ends_with(".png"))
                })
            })
        })
}

/// The first entry of the output folder `target` that fluxloom did not write.
fn foreign_entry(target: &Path) -> Result<Option<String>> {
    let entries = match std::fs::read_dir(target) {
        Ok(e) => e,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        Err(e) => return Err(Error::io(target, e)),
    };
    let listed: Vec<String> = std::fs::read_to_string(target.join(COMPLETE_MARKER))
        .map(|t| t.lines().map(str::to_string).collect())
        .unwrap_or_default();
    let mut names: Vec<String> = Vec::new();
    for entry in entries {
        let entry = entry.map_err(|e| Error::io(target, e))?;
        let name = entry.file_name().to_string_lossy().into_owned();
        let ours = name == STAGING_MARKER
            || name == COMPLETE_MARKER
            || listed.contains(&name)
            || LEGACY_NAMES.contains(&name.as_str())
            || ADDED_BY_COMMANDS.contains(&name.as_str())
            || is_figures_folder(&entry.path())
            || is_partial(&name)
            || is_legacy_staging(&entry.path());
        if !ours {
            names.push(name);
        }
    }
    names.sort();
    Ok(names.into_iter().next())
}

/// Flushes `path` (a file or folder) to disk; folders may refuse on some systems.
fn sync(path: &Path) -> Result<()> {
    match File::open(path).and_then(|f| f.sync_all()) {
        Ok(()) => Ok(()),
        Err(_) if path.is_dir() => Ok(()),
        Err(e) => Err(Error::io(path, e)),
    }
}

impl Staging {
    /// Repairs and cleans up after earlier runs ([`recover`]), checks that the
    /// output folder `target` holds only fluxloom's files, and creates the
    /// staging folder `<parent>/.<name>.fluxloom-new-<pid>`.
    ///
    /// # Errors
    /// An I/O error naming the folder, or [`Error::Usage`] when `target` holds
    /// a file fluxloom did not write.
    pub fn new(target: &Path) -> Result<Staging> {
        let dir = parent(target);
        std::fs::create_dir_all(&dir).map_err(|e| Error::io(&dir, e))?;
        recover(target)?;
        if target.exists() && !target.is_dir() {
            return Err(Error::Usage(format!(
                "{}: the output folder is a file",
                target.display()
            )));
        }
        if let Some(name) = foreign_entry(target)? {
            return Err(Error::Usage(format!(
                "{}: holds \"{name}\", which fluxloom did not write; the output folder is replaced as a whole, so choose an empty folder or one fluxloom wrote",
                target.display()
            )));
        }
        let staged = sibling(target, Kind::New, std::process::id())?;
        if staged.exists() {
            std::fs::remove_dir_all(&staged).map_err(|e| Error::io(&staged, e))?;
        }
        std::fs::create_dir(&staged).map_err(|e| Error::io(&staged, e))?;
        let marker = staged.join(STAGING_MARKER);
        let lock = File::create(&marker).map_err(|e| Error::io(&marker, e))?;
        lock.try_lock()
            .map_err(|e| Error::io(&marker, std::io::Error::other(e.to_string())))?;
        Ok(Staging {
            dir: staged,
            target: target.to_path_buf(),
            files: Vec::new(),
            committed: false,
            _lock: lock,
        })
    }

    /// The staging path of output file `name`, recorded for the commit.
    pub fn path(&mut self, name: &str) -> PathBuf {
        if !self.files.iter().any(|f| f == name) {
            self.files.push(name.to_string());
        }
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

    /// Flushes the staged files, marks the set complete and swaps it in for the
    /// old set (see the module doc); returns the final paths of the files.
    ///
    /// # Errors
    /// An I/O error naming the file or folder concerned; the old set then stays
    /// (or is put back by the next run).
    pub fn commit(mut self) -> Result<Vec<PathBuf>> {
        for name in &self.files {
            sync(&self.dir.join(name))?;
        }
        let complete = self.dir.join(COMPLETE_MARKER);
        std::fs::write(&complete, self.files.join("\n") + "\n")
            .map_err(|e| Error::io(&complete, e))?;
        sync(&complete)?;
        sync(&self.dir)?;
        let aside = sibling(&self.target, Kind::Old, std::process::id())?;
        let mut old_lock: Option<File> = None;
        if self.target.exists() {
            // Mark (and lock) the old set so a kill after the next rename leaves it recognisable.
            let marker = self.target.join(STAGING_MARKER);
            let f = File::create(&marker).map_err(|e| Error::io(&marker, e))?;
            let _ = f.try_lock();
            old_lock = Some(f);
            std::fs::rename(&self.target, &aside).map_err(|e| Error::io(&self.target, e))?;
        }
        std::fs::rename(&self.dir, &self.target).map_err(|e| Error::io(&self.target, e))?;
        self.committed = true;
        sync(&parent(&self.target))?;
        if old_lock.take().is_some() {
            std::fs::remove_dir_all(&aside).map_err(|e| Error::io(&aside, e))?;
        }
        Ok(self.files.iter().map(|f| self.target.join(f)).collect())
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

    fn listing(dir: &Path) -> Vec<String> {
        let mut names: Vec<String> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        names
    }

    /// Commits a set of `files` (name, content) into `out`.
    fn commit_set(out: &Path, files: &[(&str, &str)]) {
        let mut s = Staging::new(out).unwrap();
        for (name, text) in files {
            std::fs::write(s.path(name), text).unwrap();
        }
        s.commit().unwrap();
    }

    /// A staged folder of a dead run: pid 4000000 (above Linux's pid limit), unlocked.
    fn dead_staging(out: &Path, kind: Kind, complete: bool, text: &str) -> PathBuf {
        let dir = sibling(out, kind, 4_000_000).unwrap();
        std::fs::create_dir(&dir).unwrap();
        std::fs::write(dir.join(STAGING_MARKER), "").unwrap();
        std::fs::write(dir.join("objects.parquet"), text).unwrap();
        if complete {
            std::fs::write(dir.join(COMPLETE_MARKER), "objects.parquet\n").unwrap();
        }
        dir
    }

    fn content(out: &Path) -> String {
        std::fs::read_to_string(out.join("objects.parquet")).unwrap()
    }

    #[test]
    fn commit_swaps_the_whole_set_and_drop_cleans() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("out");
        commit_set(&out, &[("objects.parquet", "old"), ("objects.csv", "old")]);
        assert_eq!(listing(dir.path()), ["out"]);
        assert_eq!(
            listing(&out),
            [
                COMPLETE_MARKER,
                STAGING_MARKER,
                "objects.csv",
                "objects.parquet"
            ]
        );
        // The new set replaces the old one entirely: objects.csv is gone.
        commit_set(&out, &[("objects.parquet", "new")]);
        assert_eq!(listing(dir.path()), ["out"]);
        assert_eq!(
            listing(&out),
            [COMPLETE_MARKER, STAGING_MARKER, "objects.parquet"]
        );
        assert_eq!(content(&out), "new");

        let mut s = Staging::new(&out).unwrap();
        std::fs::write(s.path("objects.parquet"), "never").unwrap();
        assert_eq!(listing(dir.path()).len(), 2);
        drop(s);
        assert_eq!(listing(dir.path()), ["out"]);
        assert_eq!(content(&out), "new");
    }

    #[test]
    fn a_live_staging_is_left_alone() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("out");
        let mut s = Staging::new(&out).unwrap();
        std::fs::write(s.path("objects.parquet"), "x").unwrap();
        assert!(recover(&out).unwrap().is_empty());
        assert!(s.path("objects.parquet").exists());
    }

    #[test]
    fn killed_while_staging_keeps_the_old_set_and_the_next_run_cleans_up() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("out");
        commit_set(&out, &[("objects.parquet", "old")]);
        let stale = dead_staging(&out, Kind::New, false, "half");
        assert_eq!(content(&out), "old");
        assert_eq!(recover(&out).unwrap(), vec![stale]);
        assert_eq!(listing(dir.path()), ["out"]);
        assert_eq!(content(&out), "old");
    }

    #[test]
    fn killed_after_marking_complete_keeps_the_old_set() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("out");
        commit_set(&out, &[("objects.parquet", "old")]);
        dead_staging(&out, Kind::New, true, "new");
        recover(&out).unwrap();
        assert_eq!(listing(dir.path()), ["out"]);
        assert_eq!(content(&out), "old");
    }

    #[test]
    fn killed_between_the_renames_rolls_the_new_set_forward() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("out");
        dead_staging(&out, Kind::Old, true, "old");
        dead_staging(&out, Kind::New, true, "new");
        assert!(!out.exists());
        recover(&out).unwrap();
        assert_eq!(listing(dir.path()), ["out"]);
        assert_eq!(content(&out), "new");
    }

    #[test]
    fn killed_between_the_renames_without_a_complete_set_rolls_back() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("out");
        dead_staging(&out, Kind::Old, true, "old");
        dead_staging(&out, Kind::New, false, "half");
        recover(&out).unwrap();
        assert_eq!(listing(dir.path()), ["out"]);
        assert_eq!(content(&out), "old");
    }

    #[test]
    fn killed_before_removing_the_old_set_removes_it_next_time() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("out");
        commit_set(&out, &[("objects.parquet", "new")]);
        dead_staging(&out, Kind::Old, true, "old");
        recover(&out).unwrap();
        assert_eq!(listing(dir.path()), ["out"]);
        assert_eq!(content(&out), "new");
    }

    #[test]
    fn legacy_staging_inside_the_output_is_removed_and_user_files_are_refused() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("out");
        let legacy = out.join(".fluxloom-staging-12345");
        std::fs::create_dir_all(&legacy).unwrap();
        std::fs::write(legacy.join("objects.parquet"), "x").unwrap();
        std::fs::write(legacy.join(".run.json.partial-12345"), "x").unwrap();
        std::fs::write(out.join("objects.parquet"), "legacy").unwrap();
        commit_set(&out, &[("objects.parquet", "new")]);
        assert_eq!(content(&out), "new");
        assert!(!legacy.exists());

        // A folder that is not ours inside a look-alike name is kept.
        let mine = dir.path().join(".out.fluxloom-new-77");
        std::fs::create_dir(&mine).unwrap();
        std::fs::write(out.join("notes.txt"), "mine").unwrap();
        let err = Staging::new(&out).err().unwrap().to_string();
        assert_eq!(
            err,
            format!(
                "{}: holds \"notes.txt\", which fluxloom did not write; the output folder is replaced as a whole, so choose an empty folder or one fluxloom wrote",
                out.display()
            )
        );
        assert!(mine.exists());
        assert_eq!(
            std::fs::read_to_string(out.join("notes.txt")).unwrap(),
            "mine"
        );
    }

    #[test]
    fn files_our_commands_add_later_go_with_the_folder() {
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("out");
        commit_set(&out, &[("objects.parquet", "old")]);
        // As `fluxloom report`, `science` and `draw` leave them.
        std::fs::write(out.join("report.html"), "<html>").unwrap();
        std::fs::write(out.join("science.parquet"), "x").unwrap();
        std::fs::create_dir(out.join("figures")).unwrap();
        std::fs::write(out.join("figures").join("sed_a.svg"), "<svg/>").unwrap();
        commit_set(&out, &[("objects.parquet", "new")]);
        assert_eq!(content(&out), "new");
        assert!(!out.join("report.html").exists());

        // A figures folder holding anything else is the user's.
        commit_set(&out, &[("objects.parquet", "newer")]);
        std::fs::create_dir(out.join("figures")).unwrap();
        std::fs::write(out.join("figures").join("notes.txt"), "mine").unwrap();
        let err = Staging::new(&out).err().unwrap().to_string();
        assert!(err.contains("holds \"figures\""), "{err}");
    }
}
