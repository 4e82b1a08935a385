//! File access for scripts, only through meniscus functions: paths must lie
//! under the working directory or a directory the user allowed
//! (`--allow-path`), after canonicalisation (so `..` and symlinks cannot
//! lead outside), and writes are atomic (a temporary file in the same
//! directory, then a rename), so an error never leaves a half-written file.
//!
//! Lua side: `files.read(path)`, `files.write(path, text)`,
//! `files.exists(path)` (`files.read_csv`, `files.write_csv` and
//! `files.mkdir` are in [`super::files_csv`]). Other namespaces (sheets, plots) use
//! [`resolve_path`] and [`read_text`], and write through
//! [`crate::io::write_atomically`].

use std::io::Write;
use std::path::{Component, Path, PathBuf};

use mlua::{Lua, Value};

use super::convert::describe_value;
use super::errors::runtime;
use super::help::{add_help, set_tagged, tag};

/// Where scripts may read and write: canonical directories.
#[derive(Debug, Clone)]
pub struct FileRoots {
    /// The working directory when the host was made (relative paths start
    /// here).
    pub workdir: PathBuf,
    /// The working directory and the allowed paths, canonical.
    pub roots: Vec<PathBuf>,
    /// The host's memory limit, which bounds what may be read at once.
    pub max_read: u64,
}

impl FileRoots {
    /// Roots from the current directory and `allow`; an allowed path that
    /// does not exist is an error.
    pub fn new(allow: &[PathBuf], max_read: u64) -> Result<FileRoots, String> {
        let workdir = std::env::current_dir()
            .and_then(|d| d.canonicalize())
            .map_err(|e| format!("cannot resolve the working directory: {e}"))?;
        let mut roots = vec![workdir.clone()];
        for p in allow {
            let c = p
                .canonicalize()
                .map_err(|e| format!("allowed path '{}': {e}", p.display()))?;
            roots.push(c);
        }
        Ok(FileRoots {
            workdir,
            roots,
            max_read,
        })
    }
}

fn roots(lua: &Lua) -> mlua::Result<FileRoots> {
    lua.app_data_ref::<FileRoots>()
        .map(|r| r.clone())
        .ok_or_else(|| runtime("file access is not set up in this Lua state"))
}

fn outside(path: &Path) -> mlua::Error {
    runtime(format!(
        "'{}' is outside the working directory and the allowed paths (allow it with --allow-path)",
        path.display()
    ))
}

/// Resolves a script-given path for reading (`write = false`: the file must
/// exist) or writing (the directory must exist; the file may not). Relative
/// paths are taken from the host's working directory. The canonical result
/// must lie under an allowed root.
pub fn resolve_path(lua: &Lua, path: impl AsRef<Path>, write: bool) -> mlua::Result<PathBuf> {
    let path = path.as_ref();
    let r = roots(lua)?;
    if path.as_os_str().is_empty() {
        return Err(runtime("empty path"));
    }
    let full = if path.is_absolute() {
        path.to_path_buf()
    } else {
        r.workdir.join(path)
    };
    let canonical = match full.canonicalize() {
        Ok(c) => c,
        Err(e) if write && e.kind() == std::io::ErrorKind::NotFound => {
            let name = match full.components().next_back() {
                Some(Component::Normal(n)) => n.to_owned(),
                _ => {
                    return Err(runtime(format!(
                        "'{}' does not name a file",
                        path.display()
                    )))
                }
            };
            let parent = full.parent().unwrap_or(Path::new("/"));
            let parent = parent.canonicalize().map_err(|e| {
                runtime(format!(
                    "cannot write '{}': directory '{}': {e}",
                    path.display(),
                    parent.display()
                ))
            })?;
            parent.join(name)
        }
        Err(e) => return Err(runtime(format!("cannot open '{}': {e}", path.display()))),
    };
    if !r.roots.iter().any(|root| canonical.starts_with(root)) {
        return Err(outside(path));
    }
    if write && canonical.is_dir() {
        return Err(runtime(format!("'{}' is a directory", path.display())));
    }
    Ok(canonical)
}

/// Reads a text file a script named, after [`resolve_path`]; refuses files
/// larger than the memory limit before reading them.
pub fn read_text(lua: &Lua, path: &str) -> mlua::Result<String> {
    let p = resolve_path(lua, path, false)?;
    let max = roots(lua)?.max_read;
    let len = std::fs::metadata(&p)
        .map_err(|e| runtime(format!("cannot read '{path}': {e}")))?
        .len();
    if len > max {
        return Err(runtime(format!(
            "cannot read '{path}': {len} bytes is more than the memory limit allows"
        )));
    }
    std::fs::read_to_string(&p).map_err(|e| runtime(format!("cannot read '{path}': {e}")))
}

/// Writes text a script produced to a path it named: [`resolve_path`] for
/// writing, then [`crate::io::write_atomically`]. Returns the canonical
/// path written.
pub fn write_text(lua: &Lua, path: &str, text: &[u8]) -> mlua::Result<PathBuf> {
    let p = resolve_path(lua, path, true)?;
    crate::io::write_atomically(&p, |w| w.write_all(text))
        .map_err(|e| runtime(format!("cannot write '{path}': {e}")))?;
    Ok(p)
}

fn path_arg(v: &Value, func: &str) -> mlua::Result<String> {
    match v {
        Value::String(s) => Ok(s.to_str()?.to_string()),
        other => Err(runtime(format!(
            "{func}: path must be a string, got {}",
            describe_value(other)
        ))),
    }
}

/// Registers the `files` namespace.
pub fn register(lua: &Lua) -> mlua::Result<()> {
    let ns = lua.create_table()?;
    let read = lua.create_function(|lua, p: Value| {
        let p = path_arg(&p, "files.read")?;
        read_text(lua, &p).map_err(|e| {
            runtime(format!(
                "files.read: {}",
                super::errors::describe(&e).message
            ))
        })
    })?;
    let write = lua.create_function(|lua, (p, text): (Value, Value)| {
        let p = path_arg(&p, "files.write")?;
        let Value::String(s) = &text else {
            return Err(runtime(format!(
                "files.write: text must be a string, got {}",
                describe_value(&text)
            )));
        };
        write_text(lua, &p, &s.as_bytes()).map_err(|e| {
            runtime(format!(
                "files.write: {}",
                super::errors::describe(&e).message
            ))
        })?;
        Ok(())
    })?;
    let exists = lua.create_function(|lua, p: Value| {
        let p = path_arg(&p, "files.exists")?;
        let resolved = resolve_path(lua, &p, true).map_err(|e| {
            runtime(format!(
                "files.exists: {}",
                super::errors::describe(&e).message
            ))
        })?;
        Ok(resolved.exists())
    })?;
    set_tagged(
        lua,
        &ns,
        "files",
        vec![("read", read), ("write", write), ("exists", exists)],
    )?;
    lua.globals().set("files", ns.clone())?;
    tag(lua, Value::Table(ns), "files")?;
    add_help(
        lua,
        "files",
        "files (namespace)",
        "files.read(path), files.write(path, text), files.exists(path),\n\
         files.read_csv(path), files.write_csv(path, columns, rows),\n\
         files.mkdir(path).\n\
         Only paths under the working directory or a directory allowed with\n\
         --allow-path; writes replace the file atomically.",
    )?;
    add_help(
        lua,
        "files.read",
        "files.read(path) → string",
        "The whole text of a file under the working directory or an allowed path.",
    )?;
    add_help(
        lua,
        "files.write",
        "files.write(path, text)",
        "Writes text to a file under the working directory or an allowed path,\n\
         atomically: a temporary file in the same directory, then renamed, so\n\
         an error never leaves a half-written file.",
    )?;
    add_help(
        lua,
        "files.exists",
        "files.exists(path) → boolean",
        "Whether a file exists (the path must be an allowed one).",
    )?;
    Ok(())
}
