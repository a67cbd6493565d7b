//! Output folders written whole or not at all.
//!
//! A command that writes files first prepares an [`OutputDir`]: the files go into a hidden staging
//! folder beside the target (`.NAME.kicktrain-partial-PID`), and [`OutputDir::commit`] replaces the
//! target by it with two renames. A kill, a full disk or an error before the commit leaves the target
//! as it was (the staging folder is removed when the `OutputDir` is dropped, or by
//! [`abandon_staging`] from a signal handler). A target that exists must be empty or a folder kicktrain
//! wrote before (it holds the marker file [`MARKER`]), so a run never mixes its files with another
//! run's or deletes a user's own files.

use crate::error::{Error, Result};
use std::path::{Path, PathBuf};
use std::sync::Mutex;
use std::sync::atomic::{AtomicBool, Ordering};

/// Name of the marker file in every folder kicktrain writes; it lists the command and the files.
pub const MARKER: &str = ".kicktrain-output";

/// Every file name a kicktrain command writes into its output folder.
const KNOWN_FILES: [&str; 13] = [
    "summary.json",
    "trace.csv",
    "alignment.svg",
    "design.json",
    "design.svg",
    "history.csv",
    "convergence.svg",
    "scan.csv",
    "scan.svg",
    "tolerance.csv",
    "tolerance.svg",
    "PARTIAL.txt",
    "part.json",
];

/// Staging folders not yet committed or removed (for [`abandon_staging`]).
static STAGING: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());
/// True while a commit renames folders: a signal then waits for it instead of cutting it short.
static COMMITTING: AtomicBool = AtomicBool::new(false);

/// An output folder being written.
#[derive(Debug)]
pub struct OutputDir {
    target: PathBuf,
    staging: PathBuf,
    command: String,
    committed: bool,
}

impl OutputDir {
    /// Check that `target` can take the output of `command` and create the staging folder. Called before
    /// any work, so an output that cannot be written fails at once.
    pub fn prepare(target: &Path, command: &str) -> Result<OutputDir> {
        let shown = target.display();
        if target.as_os_str().is_empty() {
            return Err(Error::input("--out", "expected a folder name, got an empty string"));
        }
        match std::fs::symlink_metadata(target) {
            Ok(m) if !m.is_dir() => return Err(Error::input("--out", format!("{shown} exists and is not a folder"))),
            Ok(_) => {
                let names: Vec<String> = std::fs::read_dir(target)
                    .map_err(|e| Error::Io(format!("cannot read output folder {shown}: {e}")))?
                    .filter_map(|e| e.ok().map(|e| e.file_name().to_string_lossy().into_owned()))
                    .collect();
                // Ours: empty, marked, or (written before folders were marked) holding only file names kicktrain writes.
                let ours = names.is_empty() || target.join(MARKER).is_file() || names.iter().all(|n| KNOWN_FILES.contains(&n.as_str()));
                if !ours {
                    return Err(Error::input(
                        "--out",
                        format!("{shown} holds files kicktrain did not write; choose a new or empty folder (kicktrain replaces only folders it wrote)"),
                    ));
                }
            }
            Err(_) => {}
        }
        let name = target.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_else(|| "out".into());
        let parent = match target.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        std::fs::create_dir_all(&parent).map_err(|e| Error::Io(format!("cannot create folder {}: {e}", parent.display())))?;
        let staging = parent.join(format!(".{name}.kicktrain-partial-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&staging);
        std::fs::create_dir(&staging).map_err(|e| Error::Io(format!("cannot write in {}: {e}", parent.display())))?;
        STAGING.lock().unwrap_or_else(|p| p.into_inner()).push(staging.clone());
        Ok(OutputDir { target: target.to_path_buf(), staging, command: command.to_string(), committed: false })
    }

    /// The folder the files are written into until the commit.
    pub fn path(&self) -> &Path {
        &self.staging
    }

    /// The folder the files end up in.
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// Write one file into the staging folder (flushed to disk).
    pub fn write(&self, name: &str, contents: &str) -> Result<()> {
        write_synced(&self.staging.join(name), contents)
    }

    /// Put the finished folder in place of the target: the old target (if any) is renamed aside, the
    /// staging folder renamed to the target, and the old one removed.
    pub fn commit(mut self) -> Result<()> {
        let mut marker = format!("written by kicktrain {} ({}); files:\n", env!("CARGO_PKG_VERSION"), self.command);
        let mut names: Vec<String> = std::fs::read_dir(&self.staging)
            .map_err(|e| Error::Io(format!("cannot read {}: {e}", self.staging.display())))?
            .filter_map(|e| e.ok().map(|e| e.file_name().to_string_lossy().into_owned()))
            .collect();
        names.sort();
        for f in names {
            marker.push_str(&f);
            marker.push('\n');
        }
        write_synced(&self.staging.join(MARKER), &marker)?;
        COMMITTING.store(true, Ordering::SeqCst);
        let result = self.swap_in();
        COMMITTING.store(false, Ordering::SeqCst);
        result?;
        self.committed = true;
        forget(&self.staging);
        Ok(())
    }

    fn swap_in(&self) -> Result<()> {
        let shown = self.target.display();
        let old = self.staging.with_file_name(format!(
            ".{}.kicktrain-old-{}",
            self.target.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default(),
            std::process::id()
        ));
        let had_old = self.target.exists();
        if had_old {
            let _ = std::fs::remove_dir_all(&old);
            std::fs::rename(&self.target, &old).map_err(|e| Error::Io(format!("cannot replace {shown}: {e}")))?;
        }
        if let Err(e) = std::fs::rename(&self.staging, &self.target) {
            if had_old {
                let _ = std::fs::rename(&old, &self.target);
            }
            return Err(Error::Io(format!("cannot move the output into {shown}: {e}")));
        }
        if had_old {
            let _ = std::fs::remove_dir_all(&old);
        }
        Ok(())
    }
}

impl Drop for OutputDir {
    fn drop(&mut self) {
        if !self.committed {
            let _ = std::fs::remove_dir_all(&self.staging);
            forget(&self.staging);
        }
    }
}

fn forget(staging: &Path) {
    STAGING.lock().unwrap_or_else(|p| p.into_inner()).retain(|p| p != staging);
}

/// Write `contents` to `path` and flush it to disk.
pub(crate) fn write_synced(path: &Path, contents: &str) -> Result<()> {
    use std::io::Write;
    let fail = |e: std::io::Error| Error::Io(format!("cannot write {}: {e}", path.display()));
    let mut f = std::fs::File::create(path).map_err(fail)?;
    f.write_all(contents.as_bytes()).map_err(fail)?;
    f.sync_all().map_err(fail)
}

/// Whether a commit is renaming folders right now.
pub fn committing() -> bool {
    COMMITTING.load(Ordering::SeqCst)
}

/// Remove every staging folder not yet committed (for a signal handler that is about to exit).
pub fn abandon_staging() {
    let list = std::mem::take(&mut *STAGING.lock().unwrap_or_else(|p| p.into_inner()));
    for p in list {
        let _ = std::fs::remove_dir_all(p);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scratch(tag: &str) -> PathBuf {
        let d = std::env::temp_dir().join(format!("kicktrain-output-{tag}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&d);
        std::fs::create_dir_all(&d).unwrap();
        d
    }

    #[test]
    fn a_folder_appears_whole_on_commit_and_never_before() {
        let root = scratch("whole");
        let target = root.join("out");
        let o = OutputDir::prepare(&target, "test").unwrap();
        o.write("a.csv", "1\n").unwrap();
        assert!(!target.exists(), "nothing at the target before the commit");
        o.commit().unwrap();
        assert_eq!(std::fs::read_to_string(target.join("a.csv")).unwrap(), "1\n");
        assert!(target.join(MARKER).is_file());
        // A second run replaces the whole folder: no file of the first run survives.
        let o = OutputDir::prepare(&target, "test").unwrap();
        o.write("b.csv", "2\n").unwrap();
        o.commit().unwrap();
        assert!(!target.join("a.csv").exists() && target.join("b.csv").is_file());
        // Dropped without a commit: the target keeps the last complete set, no staging folder is left.
        let o = OutputDir::prepare(&target, "test").unwrap();
        o.write("c.csv", "3\n").unwrap();
        drop(o);
        assert!(target.join("b.csv").is_file() && !target.join("c.csv").exists());
        assert_eq!(std::fs::read_dir(&root).unwrap().count(), 1, "only the target is left");
        let _ = std::fs::remove_dir_all(&root);
    }

    #[test]
    fn a_folder_with_foreign_files_or_a_file_is_refused() {
        let root = scratch("foreign");
        let target = root.join("mine");
        std::fs::create_dir_all(&target).unwrap();
        std::fs::write(target.join("notes.txt"), "keep me").unwrap();
        let e = OutputDir::prepare(&target, "test").unwrap_err();
        assert!(e.to_string().starts_with("--out:"), "{e}");
        std::fs::write(root.join("file"), "x").unwrap();
        assert!(OutputDir::prepare(&root.join("file"), "test").is_err());
        assert_eq!(std::fs::read_to_string(target.join("notes.txt")).unwrap(), "keep me");
        let _ = std::fs::remove_dir_all(&root);
    }
}
