//! Atomic file replacement: write a scratch file beside the target, sync it, rename it over the
//! target.
//!
//! A reader of the target sees either the old file or the complete new one, never a half-written
//! file; when anything fails, the scratch file is removed and an existing target is left
//! untouched. The rename is atomic on POSIX file systems (and on Windows for files on one volume).
//!
//! The new file gets the default permissions of a newly created file, not those of the file it
//! replaces; a symbolic link at the target is replaced by the file, not followed.

use std::fs::{self, File, OpenOptions};
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use crate::error::{Error, Result};

/// Distinguishes the scratch files of one process.
static COUNTER: AtomicU64 = AtomicU64::new(0);

/// Writes `path` atomically: `write` fills a buffered scratch file
/// `.<name>.tmp-<pid>-<counter>` in the target's directory, which is then flushed, synced to disk
/// (`sync_all`) and renamed over `path`. On Unix the directory is synced too (best effort), so
/// that the rename itself survives a crash.
///
/// ```
/// # fn main() -> stepgauge::Result<()> {
/// let dir = std::env::temp_dir().join(format!("stepgauge-doc-atomic-{}", std::process::id()));
/// std::fs::create_dir_all(&dir).unwrap();
/// let path = dir.join("hello.txt");
/// stepgauge::io::write_atomically(&path, |w| writeln!(w, "hello"))?;
/// assert_eq!(std::fs::read_to_string(&path).unwrap(), "hello\n");
/// # std::fs::remove_dir_all(&dir).unwrap();
/// # Ok(())
/// # }
/// ```
///
/// # Errors
/// [`Error::Io`] naming the path when the scratch file cannot be created, `write` fails, or
/// the flush, sync or rename fails. In every case the scratch file is removed and an existing
/// file at `path` is left as it was.
pub fn write_atomically<F>(path: &Path, write: F) -> Result<()>
where
    F: FnOnce(&mut dyn Write) -> std::io::Result<()>,
{
    let io_err = |action: &'static str, source: std::io::Error| Error::Io {
        action,
        path: path.to_path_buf(),
        source,
    };
    let Some(name) = path.file_name() else {
        return Err(io_err(
            "write",
            std::io::Error::new(
                std::io::ErrorKind::InvalidInput,
                "the path does not name a file",
            ),
        ));
    };
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let tmp = dir.join(format!(
        ".{}.tmp-{}-{}",
        name.to_string_lossy(),
        std::process::id(),
        COUNTER.fetch_add(1, Ordering::Relaxed)
    ));
    let file = OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(&tmp)
        .map_err(|e| io_err("create a scratch file beside", e))?;
    let result = fill(file, write)
        .and_then(|()| fs::rename(&tmp, path).map_err(|e| ("rename the scratch file onto", e)));
    match result {
        Ok(()) => {
            sync_dir(&dir);
            Ok(())
        }
        Err((action, source)) => {
            let _ = fs::remove_file(&tmp);
            Err(io_err(action, source))
        }
    }
}

/// Writes, flushes and syncs the scratch file.
fn fill<F>(file: File, write: F) -> std::result::Result<(), (&'static str, std::io::Error)>
where
    F: FnOnce(&mut dyn Write) -> std::io::Result<()>,
{
    let mut w = BufWriter::with_capacity(1 << 16, file);
    write(&mut w).map_err(|e| ("write", e))?;
    let file = w.into_inner().map_err(|e| ("write", e.into_error()))?;
    file.sync_all().map_err(|e| ("sync", e))
}

/// Syncs a directory so that a rename in it is durable (Unix; errors are ignored because some
/// file systems do not support it and the data itself is already synced).
fn sync_dir(dir: &Path) {
    #[cfg(unix)]
    if let Ok(d) = File::open(dir) {
        let _ = d.sync_all();
    }
    #[cfg(not(unix))]
    let _ = dir;
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scratch(tag: &str) -> PathBuf {
        let d = std::env::temp_dir().join(format!(
            "stepgauge-atomic-{tag}-{}-{}",
            std::process::id(),
            COUNTER.fetch_add(1, Ordering::Relaxed)
        ));
        fs::create_dir_all(&d).unwrap();
        d
    }

    fn entries(dir: &Path) -> Vec<String> {
        let mut v: Vec<String> = fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }

    #[test]
    fn replaces_the_target_and_leaves_no_scratch_file() {
        let dir = scratch("ok");
        let path = dir.join("out.txt");
        fs::write(&path, "old").unwrap();
        write_atomically(&path, |w| w.write_all(b"new")).unwrap();
        assert_eq!(fs::read_to_string(&path).unwrap(), "new");
        assert_eq!(entries(&dir), vec!["out.txt".to_string()]);
        fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn a_failing_writer_leaves_the_target_and_no_scratch_file() {
        let dir = scratch("fail");
        let path = dir.join("out.txt");
        fs::write(&path, "old").unwrap();
        let e = write_atomically(&path, |w| {
            w.write_all(b"partial")?;
            Err(std::io::Error::other("disk on fire"))
        })
        .unwrap_err();
        assert!(
            matches!(&e, Error::Io { action: "write", path: p, .. } if p == &path),
            "{e}"
        );
        assert!(e.to_string().contains("out.txt"), "{e}");
        assert_eq!(fs::read_to_string(&path).unwrap(), "old");
        assert_eq!(entries(&dir), vec!["out.txt".to_string()]);
        fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn a_target_that_is_a_directory_is_refused_cleanly() {
        let dir = scratch("isdir");
        let target = dir.join("sub");
        fs::create_dir(&target).unwrap();
        fs::write(target.join("keep"), "x").unwrap();
        let e = write_atomically(&target, |w| w.write_all(b"new")).unwrap_err();
        assert!(
            matches!(
                e,
                Error::Io {
                    action: "rename the scratch file onto",
                    ..
                }
            ),
            "{e}"
        );
        assert_eq!(entries(&dir), vec!["sub".to_string()]);
        assert_eq!(fs::read_to_string(target.join("keep")).unwrap(), "x");
        fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn a_missing_directory_or_a_path_without_file_name_is_refused() {
        let dir = scratch("missing");
        let e =
            write_atomically(&dir.join("no/such/dir/out.txt"), |w| w.write_all(b"x")).unwrap_err();
        assert!(
            matches!(
                e,
                Error::Io {
                    action: "create a scratch file beside",
                    ..
                }
            ),
            "{e}"
        );
        let e = write_atomically(Path::new("/"), |w| w.write_all(b"x")).unwrap_err();
        assert!(
            matches!(
                e,
                Error::Io {
                    action: "write",
                    ..
                }
            ),
            "{e}"
        );
        assert!(entries(&dir).is_empty());
        fs::remove_dir_all(&dir).unwrap();
    }
}
