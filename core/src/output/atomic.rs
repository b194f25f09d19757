//! Write-then-rename, so readers never see a half-written file and failures leave nothing.

use super::OutputError;
use std::io::Write;
use std::path::Path;

fn io_err(path: &Path, e: impl std::fmt::Display) -> OutputError {
    OutputError::Io {
        path: path.to_path_buf(),
        reason: e.to_string(),
    }
}

/// A temporary-file builder whose files get the permissions a plain `File::create` would
/// (0o666 less the umask) rather than the private 0o600 of temporary files, because they
/// become the user's output files.
fn builder<'a>(suffix: &'a str) -> tempfile::Builder<'a, 'a> {
    let mut b = tempfile::Builder::new();
    b.prefix(".agarium-").suffix(suffix);
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        b.permissions(std::fs::Permissions::from_mode(0o666));
    }
    b
}

fn dir_of(path: &Path) -> &Path {
    match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => Path::new("."),
    }
}

/// The failure a test asked for with `fail-write:NAME` (see [`crate::fault`]).
fn injected(path: &Path) -> Result<(), OutputError> {
    if crate::fault::write_fails(path) {
        return Err(io_err(
            path,
            "No space left on device (injected by AGARIUM_TEST_FAULT)",
        ));
    }
    Ok(())
}

/// Checks that files can be created in folder `dir` before anything is written: it is a
/// folder (or the nearest existing folder above it is, the rest being created later) and a
/// file can be made there. Writability is probed by creating and removing a hidden temporary
/// file, the one test that holds for every user (root included) and file system (read-only
/// mounts, `/proc`).
pub fn check_folder_writable(dir: &Path) -> Result<(), OutputError> {
    let mut existing = dir;
    while !existing.exists() {
        existing = match existing.parent() {
            Some(p) if !p.as_os_str().is_empty() => p,
            _ => Path::new("."),
        };
    }
    if !existing.is_dir() {
        return Err(io_err(
            dir,
            format!("{} is a file, not a folder", existing.display()),
        ));
    }
    builder(".probe")
        .tempfile_in(existing)
        .map(drop)
        .map_err(|e| {
            io_err(
                dir,
                format!("cannot create files in {}: {e}", existing.display()),
            )
        })
}

/// Checks that `path` can be written by [`write_atomically`] before anything is: it is not a
/// folder, and its folder passes [`check_folder_writable`].
pub fn check_writable(path: &Path) -> Result<(), OutputError> {
    if path.is_dir() {
        return Err(io_err(path, "it is a folder"));
    }
    check_folder_writable(dir_of(path)).map_err(|e| match e {
        OutputError::Io { reason, .. } => io_err(path, reason),
        other => other,
    })
}

/// Writes `path` through `fill`, which receives a writer to a temporary file in the same
/// directory; the temporary file replaces `path` only when `fill` and the flush succeed.
pub fn write_atomically(
    path: &Path,
    fill: impl FnOnce(&mut dyn Write) -> Result<(), OutputError>,
) -> Result<(), OutputError> {
    injected(path)?;
    let mut tmp = builder(".part")
        .tempfile_in(dir_of(path))
        .map_err(|e| io_err(path, e))?;
    {
        let mut buffered = std::io::BufWriter::new(tmp.as_file_mut());
        fill(&mut buffered)?;
        buffered.flush().map_err(|e| io_err(path, e))?;
    }
    tmp.as_file().sync_all().map_err(|e| io_err(path, e))?;
    tmp.persist(path).map_err(|e| io_err(path, e.error))?;
    Ok(())
}

/// Like [`write_atomically`] for writers that insist on a path: `fill` gets the path of a
/// temporary file with the same extension as `path`.
pub fn write_atomically_via_path(
    path: &Path,
    fill: impl FnOnce(&Path) -> Result<(), OutputError>,
) -> Result<(), OutputError> {
    injected(path)?;
    let suffix = path
        .extension()
        .map(|e| format!(".{}", e.to_string_lossy()))
        .unwrap_or_default();
    let tmp = builder(&suffix)
        .tempfile_in(dir_of(path))
        .map_err(|e| io_err(path, e))?;
    fill(tmp.path())?;
    tmp.persist(path).map_err(|e| io_err(path, e.error))?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn failure_leaves_old_file_and_no_temporaries() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("out.txt");
        write_atomically(&target, |w| {
            w.write_all(b"first").map_err(|e| io_err(Path::new("x"), e))
        })
        .unwrap();
        let err = write_atomically(&target, |w| {
            w.write_all(b"partial")
                .map_err(|e| io_err(Path::new("x"), e))?;
            Err(OutputError::Encode {
                path: "x".into(),
                reason: "boom".into(),
            })
        });
        assert!(err.is_err());
        assert_eq!(std::fs::read_to_string(&target).unwrap(), "first");
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    #[test]
    fn writability_is_checked_before_writing() {
        let dir = tempfile::tempdir().unwrap();
        let file = dir.path().join("plain.txt");
        std::fs::write(&file, "x").unwrap();
        // A folder where a file is meant, and a file where a folder is meant.
        let err = check_writable(dir.path()).unwrap_err().to_string();
        assert!(err.contains("it is a folder"), "{err}");
        let err = check_writable(&file.join("sub/x.png"))
            .unwrap_err()
            .to_string();
        assert!(err.contains("is a file, not a folder"), "{err}");
        // Missing folders below a writable one are fine (created later), and no probe stays.
        check_writable(&dir.path().join("new/deeper/x.png")).unwrap();
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    #[test]
    fn missing_directory_is_an_error() {
        let err =
            write_atomically(Path::new("/nonexistent-dir-agarium/x.vtu"), |_| Ok(())).unwrap_err();
        assert!(err.to_string().contains("/nonexistent-dir-agarium/x.vtu"));
    }
}
