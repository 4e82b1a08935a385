//! File output for the front ends. The kernel only writes to an
//! `io::Write`; this module turns that into a file that is either written
//! completely or not at all: the data goes to a temporary file in the same
//! directory, which is flushed to disk and then renamed over the target.
//! An error (or a panic) while writing removes the temporary file and
//! leaves any existing target untouched.

use std::fs::{self, File, OpenOptions};
use std::io::{self, BufWriter};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

/// Writes `path` through `write`, atomically: readers of `path` see either
/// the old file or the complete new one, never a part.
///
/// `write` gets a buffered writer to a temporary file next to `path`. If it
/// returns `Ok`, the data is flushed, synced to disk and the temporary file
/// is renamed to `path` (replacing an existing file, whose permissions the
/// new file takes). If `write`, the flush or the rename fails, the temporary
/// file is removed and the error returned. A symbolic link at `path` is
/// replaced by a regular file, not followed.
///
/// ```no_run
/// use std::io::Write;
/// meniscus::io::write_atomically("table.csv", |w| -> std::io::Result<()> {
///     writeln!(w, "abv,t")?;
///     writeln!(w, "40,20")
/// })?;
/// # Ok::<(), std::io::Error>(())
/// ```
pub fn write_atomically<P, T, E, F>(path: P, write: F) -> Result<T, E>
where
    P: AsRef<Path>,
    F: FnOnce(&mut BufWriter<File>) -> Result<T, E>,
    E: From<io::Error>,
{
    let path = path.as_ref();
    let (file, temp) = create_temp(path)?;
    let guard = RemoveOnDrop(Some(temp));
    let mut w = BufWriter::new(file);
    let value = write(&mut w)?;
    let file = w.into_inner().map_err(|e| e.into_error())?;
    if let Ok(meta) = fs::metadata(path) {
        // Best effort: keep the permissions of the file being replaced.
        let _ = file.set_permissions(meta.permissions());
    }
    file.sync_all()?;
    drop(file);
    let temp = guard.0.as_deref().unwrap_or(path);
    fs::rename(temp, path)?;
    guard.disarm();
    sync_parent(path);
    Ok(value)
}

static COUNTER: AtomicU64 = AtomicU64::new(0);

/// A new, exclusively created temporary file beside `path`.
fn create_temp(path: &Path) -> io::Result<(File, PathBuf)> {
    let name = path.file_name().ok_or_else(|| {
        io::Error::new(
            io::ErrorKind::InvalidInput,
            format!("\"{}\" does not name a file", path.display()),
        )
    })?;
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let mut last_err = None;
    for _ in 0..100 {
        let n = COUNTER.fetch_add(1, Ordering::Relaxed);
        let mut temp_name = std::ffi::OsString::from(".");
        temp_name.push(name);
        temp_name.push(format!(".{}-{n}.tmp", std::process::id()));
        let temp = dir.join(temp_name);
        match OpenOptions::new().write(true).create_new(true).open(&temp) {
            Ok(f) => return Ok((f, temp)),
            Err(e) if e.kind() == io::ErrorKind::AlreadyExists => last_err = Some(e),
            Err(e) => return Err(e),
        }
    }
    Err(last_err.unwrap_or_else(|| io::Error::other("no free temporary file name")))
}

/// Makes the rename itself durable (directory entry on disk). Best effort:
/// by now the new file is complete and in place.
fn sync_parent(path: &Path) {
    #[cfg(unix)]
    {
        let dir = match path.parent() {
            Some(d) if !d.as_os_str().is_empty() => d,
            _ => Path::new("."),
        };
        if let Ok(d) = File::open(dir) {
            let _ = d.sync_all();
        }
    }
    #[cfg(not(unix))]
    let _ = path;
}

/// Removes the temporary file unless the write went through.
struct RemoveOnDrop(Option<PathBuf>);

impl RemoveOnDrop {
    fn disarm(mut self) {
        self.0 = None;
    }
}

impl Drop for RemoveOnDrop {
    fn drop(&mut self) {
        if let Some(p) = self.0.take() {
            let _ = fs::remove_file(p);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::io::Write;

    fn names(dir: &Path) -> Vec<String> {
        let mut v: Vec<String> = fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }

    #[test]
    fn writes_the_whole_file() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("out.csv");
        write_atomically(&p, |w| -> io::Result<()> { w.write_all(b"a,b\n1,2\n") }).unwrap();
        assert_eq!(fs::read_to_string(&p).unwrap(), "a,b\n1,2\n");
        assert_eq!(names(dir.path()), vec!["out.csv"]);
    }

    #[test]
    fn an_error_keeps_the_old_file_and_leaves_no_temporary() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("out.csv");
        fs::write(&p, "old\n").unwrap();
        let r = write_atomically(&p, |w| -> io::Result<()> {
            w.write_all(b"half")?;
            Err(io::Error::other("disk full"))
        });
        assert_eq!(r.unwrap_err().to_string(), "disk full");
        assert_eq!(fs::read_to_string(&p).unwrap(), "old\n");
        assert_eq!(names(dir.path()), vec!["out.csv"]);
    }

    #[test]
    fn a_panic_leaves_no_temporary() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("out.csv");
        let r = std::panic::catch_unwind(|| {
            let _ = write_atomically(&p, |w| -> io::Result<()> {
                w.write_all(b"half")?;
                panic!("evaluation blew up")
            });
        });
        assert!(r.is_err());
        assert!(names(dir.path()).is_empty());
    }

    #[test]
    fn a_missing_directory_is_an_error() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("no/such/dir/out.csv");
        let r = write_atomically(&p, |w| -> io::Result<()> { w.write_all(b"x") });
        assert_eq!(r.unwrap_err().kind(), io::ErrorKind::NotFound);
    }
}
