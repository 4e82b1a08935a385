//! CSV tables and output directories for scripts, added to the `files`
//! namespace: `files.read_csv(path [, opts])` gives the rows as Lua tables
//! keyed by column name (numbers inferred per column by the kernel's
//! [`Sheet::read_csv`], with its checks: ragged rows, NaN, invalid UTF-8,
//! open quotes, each with its line and column), `files.write_csv(path,
//! columns, rows)` writes rows atomically, and `files.mkdir(path)` creates
//! a directory — all only under the working directory or an allowed path
//! (see [`super::files`]).

use std::path::{Component, Path, PathBuf};

use mlua::{Lua, Table, Value};

use super::convert::describe_value;
use super::errors::{describe, runtime};
use super::files::{resolve_path, write_text, FileRoots};
use super::help::{add_help, set_tagged};
use crate::kernel::sheet::{CellRef, ColumnData, CsvOptions};
use crate::kernel::{self, Sheet};

/// Largest whole number given to Lua as an integer rather than a float
/// (2⁵³: every integer up to it is exact in an f64).
const MAX_EXACT_INT: f64 = 9_007_199_254_740_992.0;

fn path_arg(v: &Value, func: &str) -> mlua::Result<String> {
    match v {
        Value::String(s) => Ok(s.to_str()?.to_string()),
        other => Err(runtime(format!(
            "{func}: path must be a string, got {}",
            describe_value(other)
        ))),
    }
}

/// Prefixes a host error with the function name, keeping its message.
fn with_func(func: &str, e: mlua::Error) -> mlua::Error {
    runtime(format!("{func}: {}", describe(&e).message))
}

/// A kernel error about a file, with CSV positions written `path:line:`.
fn file_error(func: &str, path: &str, e: kernel::Error) -> mlua::Error {
    match e {
        kernel::Error::Csv {
            line,
            column,
            message,
        } => {
            let col = column.map(|c| format!("column {c}: ")).unwrap_or_default();
            runtime(format!("{func}: {path}:{line}: {col}{message}"))
        }
        other => runtime(format!("{func}: {path}: {other}")),
    }
}

fn read_options(v: Option<&Value>, func: &str) -> mlua::Result<CsvOptions> {
    let mut o = CsvOptions::default();
    let t = match v {
        None | Some(Value::Nil) => return Ok(o),
        Some(Value::Table(t)) => t,
        Some(other) => {
            return Err(runtime(format!(
            "{func}: options must be a table like {{allow_empty = true, delimiter = ';'}}, got {}",
            describe_value(other)
        )))
        }
    };
    t.for_each::<Value, Value>(|k, v| {
        let key = match &k {
            Value::String(s) => s.to_string_lossy(),
            other => {
                return Err(runtime(format!(
                    "{func}: unknown option {} (accepted: allow_empty, delimiter)",
                    describe_value(other)
                )))
            }
        };
        match (key.as_str(), &v) {
            ("allow_empty", Value::Boolean(b)) => o.allow_empty_numbers = *b,
            ("delimiter", Value::String(s)) if s.as_bytes().len() == 1 => {
                let d = s.as_bytes()[0];
                if d == b'"' || d == b'\n' || d == b'\r' {
                    return Err(runtime(format!(
                        "{func}: the delimiter cannot be a quote or a line break"
                    )));
                }
                o.delimiter = d;
            }
            ("allow_empty", other) => {
                return Err(runtime(format!(
                    "{func}: allow_empty must be true or false, got {}",
                    describe_value(other)
                )))
            }
            ("delimiter", other) => {
                return Err(runtime(format!(
                    "{func}: delimiter must be one character such as ',' or ';', got {}",
                    describe_value(other)
                )))
            }
            (other, _) => {
                return Err(runtime(format!(
                    "{func}: unknown option '{other}' (accepted: allow_empty, delimiter)"
                )))
            }
        }
        Ok(())
    })?;
    Ok(o)
}

fn cell_value(x: f64) -> Value {
    if x.fract() == 0.0 && x.abs() <= MAX_EXACT_INT {
        // Whole numbers (counts, years, order numbers) read as integers.
        Value::Integer(x as i64)
    } else {
        Value::Number(x)
    }
}

fn read_csv(lua: &Lua, (p, opts): (Value, Option<Value>)) -> mlua::Result<(Table, Table)> {
    let func = "files.read_csv";
    let path = path_arg(&p, func)?;
    let options = read_options(opts.as_ref(), func)?;
    let full = resolve_path(lua, &path, false).map_err(|e| with_func(func, e))?;
    let max = lua
        .app_data_ref::<FileRoots>()
        .map(|r| r.max_read)
        .unwrap_or(u64::MAX);
    let len = std::fs::metadata(&full)
        .map_err(|e| runtime(format!("{func}: cannot read '{path}': {e}")))?
        .len();
    if len > max {
        return Err(runtime(format!(
            "{func}: cannot read '{path}': {len} bytes is more than the memory limit allows"
        )));
    }
    let bytes =
        std::fs::read(&full).map_err(|e| runtime(format!("{func}: cannot read '{path}': {e}")))?;
    let sheet = Sheet::read_csv(&bytes[..], &options).map_err(|e| file_error(func, &path, e))?;
    drop(bytes);

    let names: Vec<String> = sheet.column_names().iter().map(|s| s.to_string()).collect();
    let columns = lua.create_sequence_from(names.iter().map(|s| s.as_str()))?;
    let rows = lua.create_table_with_capacity(sheet.nrows(), 0)?;
    for r in 0..sheet.nrows() {
        rows.raw_set(r + 1, lua.create_table_with_capacity(0, names.len())?)?;
    }
    for (j, name) in names.iter().enumerate() {
        let Some((_, col)) = sheet.column_at(j) else {
            continue;
        };
        let key = lua.create_string(name)?;
        for r in 0..sheet.nrows() {
            let v = match col.get(r) {
                Some(CellRef::Number(x)) => cell_value(x),
                Some(CellRef::Text(s)) => Value::String(lua.create_string(s)?),
                Some(CellRef::Empty) | None => continue,
            };
            let row: Table = rows.raw_get(r + 1)?;
            row.raw_set(key.clone(), v)?;
        }
    }
    Ok((rows, columns))
}

/// The column names given to `files.write_csv`: a list of non-empty,
/// distinct strings.
fn column_names(v: &Value, func: &str) -> mlua::Result<Vec<String>> {
    let Value::Table(t) = v else {
        return Err(runtime(format!(
            "{func}: columns must be a list of names like {{'tank', 'abv'}}, got {}",
            describe_value(v)
        )));
    };
    let n = t.raw_len();
    let mut names = Vec::with_capacity(n);
    for i in 1..=n {
        match t.raw_get::<Value>(i)? {
            Value::String(s) => names.push(s.to_str()?.to_string()),
            other => {
                return Err(runtime(format!(
                    "{func}: columns[{i}] must be a string, got {}",
                    describe_value(&other)
                )))
            }
        }
    }
    let mut count = 0usize;
    t.for_each::<Value, Value>(|_, _| {
        count += 1;
        Ok(())
    })?;
    if count != n {
        return Err(runtime(format!(
            "{func}: columns must be a plain list of names (it has other keys or a hole)"
        )));
    }
    if names.is_empty() {
        return Err(runtime(format!("{func}: give at least one column")));
    }
    Ok(names)
}

/// One cell for `files.write_csv`.
fn out_cell(v: Value, func: &str, row: usize, col: &str) -> mlua::Result<kernel::Value> {
    match v {
        Value::Nil => Ok(kernel::Value::Empty),
        Value::Integer(i) => Ok(kernel::Value::Number(i as f64)),
        Value::Number(x) if x.is_finite() => Ok(kernel::Value::Number(x)),
        Value::Number(x) => Err(runtime(format!(
            "{func}: row {row}, column '{col}': {x} is not a finite number"
        ))),
        Value::String(s) => Ok(kernel::Value::from(s.to_str()?.to_string())),
        other => Err(runtime(format!(
            "{func}: row {row}, column '{col}': a cell must be a number, a string or nil, got {}",
            describe_value(&other)
        ))),
    }
}

fn write_csv(lua: &Lua, (p, cols, rows): (Value, Value, Value)) -> mlua::Result<()> {
    let func = "files.write_csv";
    let path = path_arg(&p, func)?;
    let names = column_names(&cols, func)?;
    let Value::Table(rows) = rows else {
        return Err(runtime(format!(
            "{func}: rows must be a list of tables (keyed by column name, or in column order), got {}",
            describe_value(&rows)
        )));
    };
    let n = rows.raw_len();
    let mut data: Vec<Vec<kernel::Value>> = names.iter().map(|_| Vec::with_capacity(n)).collect();
    for r in 1..=n {
        let row = match rows.raw_get::<Value>(r)? {
            Value::Table(t) => t,
            other => {
                return Err(runtime(format!(
                    "{func}: rows[{r}] must be a table, got {}",
                    describe_value(&other)
                )))
            }
        };
        let positional = row.raw_len() > 0;
        // Every key must be a column (or a position): a misspelt key is
        // an error, not a silently empty cell.
        row.for_each::<Value, Value>(|k, _| {
            let ok = match &k {
                Value::String(s) if !positional => {
                    let b = s.as_bytes();
                    names.iter().any(|n| n.as_bytes() == &*b)
                }
                Value::Integer(i) if positional => *i >= 1 && (*i as usize) <= names.len(),
                _ => false,
            };
            let key = match &k {
                Value::String(s) => format!("'{}'", s.to_string_lossy()),
                other => describe_value(other),
            };
            if ok {
                Ok(())
            } else if positional {
                Err(runtime(format!(
                    "{func}: rows[{r}] is a list but has the key {key} (a row is either a list in column order or a table keyed by column name; there are {} columns)",
                    names.len()
                )))
            } else {
                Err(runtime(format!(
                    "{func}: rows[{r}] has the key {key}, which is not one of the columns ({})",
                    names.join(", ")
                )))
            }
        })?;
        for (j, name) in names.iter().enumerate() {
            let v: Value = if positional {
                row.raw_get(j + 1)?
            } else {
                row.raw_get(name.as_str())?
            };
            data[j].push(out_cell(v, func, r, name)?);
        }
    }
    let sheet = Sheet::from_columns(
        names
            .iter()
            .zip(data)
            .map(|(n, d)| (n.clone(), ColumnData::Values(d)))
            .collect(),
    )
    .map_err(|e| runtime(format!("{func}: {e}")))?;
    let mut out = Vec::new();
    sheet
        .write_csv(&mut out, &CsvOptions::default())
        .map_err(|e| runtime(format!("{func}: {e}")))?;
    write_text(lua, &path, &out).map_err(|e| with_func(func, e))?;
    Ok(())
}

/// Creates `path` and any missing parents, but only under an allowed root:
/// the deepest existing ancestor is canonicalised and checked, and the
/// missing part may hold only plain names (no `..`).
fn mkdir(lua: &Lua, p: Value) -> mlua::Result<()> {
    let func = "files.mkdir";
    let path = path_arg(&p, func)?;
    if path.is_empty() {
        return Err(runtime(format!("{func}: empty path")));
    }
    let roots = lua
        .app_data_ref::<FileRoots>()
        .map(|r| r.clone())
        .ok_or_else(|| runtime("file access is not set up in this Lua state"))?;
    let given = Path::new(&path);
    let full = if given.is_absolute() {
        given.to_path_buf()
    } else {
        roots.workdir.join(given)
    };
    // Walk up to the deepest part that exists.
    let mut existing = full.as_path();
    let mut missing: Vec<&std::ffi::OsStr> = Vec::new();
    while !existing.exists() {
        match existing.components().next_back() {
            Some(Component::Normal(name)) => missing.push(name),
            Some(Component::CurDir) => {}
            _ => {
                return Err(runtime(format!(
                    "{func}: '{path}': only plain directory names may be created (no '..')"
                )))
            }
        }
        existing = existing.parent().unwrap_or(Path::new("/"));
    }
    let base = existing
        .canonicalize()
        .map_err(|e| runtime(format!("{func}: '{path}': {e}")))?;
    let mut target: PathBuf = base;
    for name in missing.iter().rev() {
        target.push(name);
    }
    if !roots.roots.iter().any(|root| target.starts_with(root)) {
        return Err(runtime(format!(
            "{func}: '{path}' is outside the working directory and the allowed paths (allow it with --allow-path)"
        )));
    }
    if target.exists() && !target.is_dir() {
        return Err(runtime(format!(
            "{func}: '{path}' exists and is not a directory"
        )));
    }
    std::fs::create_dir_all(&target)
        .map_err(|e| runtime(format!("{func}: cannot create '{path}': {e}")))
}

/// Adds `read_csv`, `write_csv` and `mkdir` to the `files` namespace
/// (registered after [`super::files::register`]).
pub fn register(lua: &Lua) -> mlua::Result<()> {
    let ns: Table = match lua.globals().get::<Value>("files")? {
        Value::Table(t) => t,
        _ => {
            let t = lua.create_table()?;
            lua.globals().set("files", t.clone())?;
            t
        }
    };
    set_tagged(
        lua,
        &ns,
        "files",
        vec![
            ("read_csv", lua.create_function(read_csv)?),
            ("write_csv", lua.create_function(write_csv)?),
            ("mkdir", lua.create_function(mkdir)?),
        ],
    )?;
    add_help(
        lua,
        "files.read_csv",
        "files.read_csv(path [, {allow_empty=false, delimiter=','}]) → rows, columns",
        "Reads a CSV file with a header row. rows[i] is a table keyed by column\n\
         name; columns lists the names in file order. A column whose every field\n\
         is a number is read as numbers (whole numbers as integers); NaN, inf and\n\
         empty fields in it are errors naming the line and column, unless\n\
         allow_empty = true, which leaves empty fields out of the row (nil).\n\
         Other columns are text, kept as written; empty text fields are nil.\n\
         Ragged rows, invalid UTF-8 and unclosed quotes are errors with the line.\n\
         Only files under the working directory or an allowed path.",
    )?;
    add_help(
        lua,
        "files.write_csv",
        "files.write_csv(path, columns, rows)",
        "Writes a CSV file: a header from columns (a list of names), then one\n\
         record per row. A row is a table keyed by column name (a key that is\n\
         not a column is an error) or a list in column order; nil cells are\n\
         empty fields. Numbers are written in the shortest form that reads\n\
         back exactly; NaN and infinities are refused. The file is replaced\n\
         atomically (a temporary file, then renamed): an error never leaves a\n\
         half-written table.",
    )?;
    add_help(
        lua,
        "files.mkdir",
        "files.mkdir(path)",
        "Creates a directory and any missing parents, only under the working\n\
         directory or an allowed path; nothing happens if it already exists.",
    )?;
    Ok(())
}
