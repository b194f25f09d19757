//! The lock of an output folder: `run` and `resume` hold an OS file lock on `.agarium.lock`
//! in the folder while they write there, so a second run or resume into the same folder is
//! refused instead of mixing files. The lock is the kernel's (`flock` on Unix, `LockFileEx`
//! on Windows, through `fs4`), so it ends with the process that held it: a killed run leaves
//! the file but never a held lock. The file itself stays (removing it on release would race
//! with a process that has just opened it).

use std::fs::{File, OpenOptions};
use std::path::{Path, PathBuf};

use crate::error::RunError;

/// File name of the lock in the output folder.
pub const LOCK_FILE: &str = ".agarium.lock";

/// Prefix of the temporary files of atomic writes (`.agarium-XXXXXX.part`, …), which a killed
/// run can leave behind.
pub const TEMPORARY_PREFIX: &str = ".agarium-";

/// A held lock on an output folder; released when dropped (or when the process ends).
#[derive(Debug)]
pub struct FolderLock {
    _file: File,
    dir: PathBuf,
}

impl FolderLock {
    /// Takes the lock of folder `dir` (which must exist), or says which folder is busy.
    pub fn acquire(dir: &Path) -> Result<Self, RunError> {
        let path = dir.join(LOCK_FILE);
        let file = OpenOptions::new()
            .read(true)
            .write(true)
            .create(true)
            .truncate(false)
            .open(&path)
            .map_err(|e| {
                RunError::failure(format!(
                    "{}: cannot open the folder's lock: {e}",
                    path.display()
                ))
            })?;
        // Fully qualified: std's inherent `File::try_lock` is newer than the declared MSRV.
        match fs4::FileExt::try_lock(&file) {
            Ok(()) => Ok(Self {
                _file: file,
                dir: dir.to_path_buf(),
            }),
            Err(fs4::TryLockError::WouldBlock) => Err(RunError::input(format!(
                "{}: another agarium run or resume is writing into this folder (it holds {LOCK_FILE}); wait for it to end, or choose another folder",
                dir.display()
            ))),
            Err(fs4::TryLockError::Error(e)) => Err(RunError::failure(format!(
                "{}: cannot lock: {e}",
                path.display()
            ))),
        }
    }

    /// Removes the temporary files that a killed run's atomic writes left in the folder
    /// (only safe while the lock is held: no other run is writing them). Returns how many.
    pub fn remove_leftovers(&self) -> Result<usize, RunError> {
        let mut removed = 0;
        for path in leftovers(&self.dir) {
            std::fs::remove_file(&path).map_err(|e| {
                RunError::failure(format!("{}: cannot remove it: {e}", path.display()))
            })?;
            removed += 1;
        }
        Ok(removed)
    }
}

/// Whether `name` is a file agarium keeps in a folder besides the run's outputs: the lock,
/// or a temporary file of an atomic write.
pub fn is_housekeeping(name: &str) -> bool {
    name == LOCK_FILE || name.starts_with(TEMPORARY_PREFIX)
}

/// The temporary files of atomic writes in `dir`.
pub fn leftovers(dir: &Path) -> Vec<PathBuf> {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return Vec::new();
    };
    entries
        .filter_map(|e| e.ok().map(|e| e.path()))
        .filter(|p| p.is_file())
        .filter(|p| {
            p.file_name()
                .and_then(|n| n.to_str())
                .is_some_and(|n| n.starts_with(TEMPORARY_PREFIX))
        })
        .collect()
}
