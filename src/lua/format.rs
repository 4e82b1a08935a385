//! Readable display of Lua values for the REPL, `show` and `print`: numbers
//! to six significant digits, records as aligned `key = value` lines, a
//! record of equal-length vectors as columns, long sequences and vectors
//! abbreviated with "…" and a count. Cycles and depth are bounded, and so
//! is the output, whatever the value.

use std::collections::HashSet;
use std::ffi::c_void;

use mlua::{Lua, Table, Value};

use super::mixture::MixtureUd;
use super::vector::Vector;

/// Nesting shown before a table is abbreviated to `{…}`.
const MAX_DEPTH: usize = 5;
/// Sequences and vectors up to this length are shown whole.
const SHOW_ALL: usize = 12;
/// Of a longer sequence or vector: this many leading values…
const HEAD: usize = 6;
/// …and this many trailing ones.
const TAIL: usize = 2;
/// Keys of a record shown before the rest are counted.
const MAX_KEYS: usize = 60;
/// Rows of a column display shown in full.
const MAX_ROWS: usize = 24;
/// Lines of output for one value, whatever its shape.
const MAX_LINES: usize = 400;
/// Keys listed first, in this order, when present (strength tables read in
/// the order of the bases, each followed by its uncertainty).
const KEY_ORDER: &[&str] = &[
    "w",
    "u_w",
    "abm",
    "u_abm",
    "x",
    "u_x",
    "abv",
    "u_abv",
    "proof",
    "u_proof",
    "density",
    "t",
    "mass",
    "volume_sum",
    "volume",
    "contraction",
];

/// A number to six significant digits with trailing zeros dropped; large
/// and tiny magnitudes in exponent form.
pub fn fmt_number(x: f64) -> String {
    if x.is_nan() {
        return "nan".into();
    }
    if x.is_infinite() {
        return if x > 0.0 { "inf".into() } else { "-inf".into() };
    }
    if x == 0.0 {
        return "0".into();
    }
    let exp = x.abs().log10().floor() as i32;
    if !(-5..15).contains(&exp) {
        let s = format!("{x:.5e}");
        let (mant, e) = s.split_once('e').unwrap_or((&s, "0"));
        return format!("{}e{}", trim_zeros(mant), e);
    }
    let decimals = (5 - exp).max(0) as usize;
    let s = format!("{x:.decimals$}");
    let s = trim_zeros(&s).to_string();
    if s == "-0" {
        "0".into()
    } else {
        s
    }
}

fn trim_zeros(s: &str) -> &str {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.')
    } else {
        s
    }
}

/// A Lua string literal for `s` (quoted, escaped).
pub fn quote(s: &[u8]) -> String {
    let mut out = String::with_capacity(s.len() + 2);
    out.push('"');
    for ch in String::from_utf8_lossy(s).chars() {
        match ch {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            '\n' => out.push_str("\\n"),
            '\t' => out.push_str("\\t"),
            '\r' => out.push_str("\\r"),
            c if (c as u32) < 0x20 => out.push_str(&format!("\\{}", c as u32)),
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

/// A vector as `vec{…}`, abbreviated when long.
pub fn fmt_vector(data: &[f64]) -> String {
    let n = data.len();
    if n <= SHOW_ALL {
        let items: Vec<String> = data.iter().map(|&x| fmt_number(x)).collect();
        return format!("vec{{{}}}", items.join(", "));
    }
    let mut items: Vec<String> = data[..HEAD].iter().map(|&x| fmt_number(x)).collect();
    items.push("…".into());
    items.extend(data[n - TAIL..].iter().map(|&x| fmt_number(x)));
    format!("vec{{{}}} ({n} values)", items.join(", "))
}

/// Formats one value for display; a top-level string is shown as it is
/// and a top-level record as aligned `key = value` lines.
pub fn format_value(lua: &Lua, v: &Value) -> String {
    let mut f = Formatter {
        lua,
        seen: HashSet::new(),
    };
    let s = f.value(v, 0, true);
    limit_lines(s)
}

/// Formats one value as it would appear nested in a table: strings quoted,
/// short tables on one line in braces.
pub fn format_nested(lua: &Lua, v: &Value) -> String {
    let mut f = Formatter {
        lua,
        seen: HashSet::new(),
    };
    let s = f.value(v, 0, false);
    limit_lines(s)
}

fn limit_lines(s: String) -> String {
    let n = s.lines().count();
    if n <= MAX_LINES {
        return s;
    }
    let mut out: Vec<&str> = s.lines().take(MAX_LINES).collect();
    let more = format!("… ({} more lines)", n - MAX_LINES);
    out.push(&more);
    out.join("\n")
}

struct Formatter<'a> {
    lua: &'a Lua,
    seen: HashSet<*const c_void>,
}

/// What a table holds, gathered without running any metamethod.
struct Shape {
    seq_len: usize,
    /// Non-sequence entries (at most MAX_KEYS + 1 kept).
    entries: Vec<(Value, Value)>,
    /// How many non-sequence entries there are in all.
    entry_count: usize,
}

impl Formatter<'_> {
    fn value(&mut self, v: &Value, depth: usize, top: bool) -> String {
        match v {
            Value::Nil => "nil".into(),
            Value::Boolean(b) => b.to_string(),
            Value::Integer(i) => i.to_string(),
            Value::Number(x) => fmt_number(*x),
            Value::String(s) => {
                if top {
                    String::from_utf8_lossy(&s.as_bytes()).into_owned()
                } else {
                    quote(&s.as_bytes())
                }
            }
            Value::Table(t) => self.table(t, depth, top),
            Value::UserData(ud) => {
                if let Ok(v) = ud.borrow::<Vector>() {
                    fmt_vector(v.as_slice())
                } else if let Ok(m) = ud.borrow::<MixtureUd>() {
                    format!("mixture: {}", m.0.name())
                } else {
                    self.tostring(v)
                }
            }
            Value::Function(f) => match super::help::function_name(self.lua, f) {
                Some(name) => format!("function: {name}"),
                None => "function".into(),
            },
            Value::Thread(_) => "coroutine".into(),
            Value::Error(e) => super::errors::describe(e).message,
            other => other.type_name().into(),
        }
    }

    /// `tostring` as the script would see it (the original function, not a
    /// replaced global), for values with a `__tostring` of their own.
    fn tostring(&self, v: &Value) -> String {
        match super::sandbox::original_tostring(self.lua, v) {
            Ok(s) => s,
            Err(e) => format!(
                "<error in __tostring: {}>",
                super::errors::describe(&e).message
            ),
        }
    }

    fn shape(&self, t: &Table) -> Shape {
        let seq_len = t.raw_len();
        let mut entries = Vec::new();
        let mut entry_count = 0usize;
        let _ = t.for_each::<Value, Value>(|k, v| {
            if let Value::Integer(i) = k {
                if i >= 1 && (i as usize) <= seq_len {
                    return Ok(());
                }
            }
            entry_count += 1;
            if entries.len() <= MAX_KEYS {
                entries.push((k, v));
            }
            Ok(())
        });
        entries.sort_by_key(|a| key_rank(&a.0));
        Shape {
            seq_len,
            entries,
            entry_count,
        }
    }

    fn table(&mut self, t: &Table, depth: usize, top: bool) -> String {
        if let Some(mt) = t.metatable() {
            if mt
                .raw_get::<Value>("__tostring")
                .map(|v| !v.is_nil())
                .unwrap_or(false)
            {
                return self.tostring(&Value::Table(t.clone()));
            }
        }
        // A read-only view (a plugin namespace) shows what it reads through to.
        let t = &super::readonly::inner(self.lua, t).unwrap_or_else(|| t.clone());
        let ptr = t.to_pointer();
        if self.seen.contains(&ptr) {
            return "<cycle>".into();
        }
        if depth >= MAX_DEPTH {
            return "{…}".into();
        }
        self.seen.insert(ptr);
        let out = self.table_body(t, depth, top);
        self.seen.remove(&ptr);
        out
    }

    fn table_body(&mut self, t: &Table, depth: usize, top: bool) -> String {
        let shape = self.shape(t);
        if shape.seq_len == 0 && shape.entry_count == 0 {
            return "{}".into();
        }
        if shape.seq_len == 0 {
            if let Some(cols) = self.columns(&shape) {
                return cols;
            }
        }
        // Sequence part.
        let mut seq_items: Vec<String> = Vec::new();
        let n = shape.seq_len;
        let shown: Vec<usize> = if n <= SHOW_ALL {
            (1..=n).collect()
        } else {
            (1..=HEAD).chain(n - TAIL + 1..=n).collect()
        };
        for (j, i) in shown.iter().enumerate() {
            if n > SHOW_ALL && j == HEAD {
                seq_items.push("…".into());
            }
            let v: Value = t.raw_get(*i).unwrap_or(Value::Nil);
            seq_items.push(self.value(&v, depth + 1, false));
        }
        let seq_note = if n > SHOW_ALL {
            format!(" ({n} items)")
        } else {
            String::new()
        };
        // Record part.
        let mut rec: Vec<(String, String)> = Vec::new();
        for (k, v) in shape.entries.iter().take(MAX_KEYS) {
            rec.push((self.key(k), self.value(v, depth + 1, false)));
        }
        let more_keys = shape.entry_count.saturating_sub(MAX_KEYS);

        let multiline = seq_items
            .iter()
            .chain(rec.iter().map(|(_, v)| v))
            .any(|s| s.contains('\n'));
        if rec.is_empty() && !multiline {
            let inline = format!("{{{}}}{seq_note}", seq_items.join(", "));
            if inline.chars().count() <= 100 || n > SHOW_ALL {
                return inline;
            }
        }
        let inline_len: usize = seq_items.iter().map(|s| s.len() + 2).sum::<usize>()
            + rec
                .iter()
                .map(|(k, v)| k.len() + v.len() + 5)
                .sum::<usize>();
        if !top && !multiline && inline_len <= 72 && more_keys == 0 {
            let mut parts = seq_items.clone();
            parts.extend(rec.iter().map(|(k, v)| format!("{k} = {v}")));
            return format!("{{{}}}{seq_note}", parts.join(", "));
        }
        // Multi-line, keys aligned.
        let width = rec
            .iter()
            .map(|(k, _)| k.chars().count())
            .max()
            .unwrap_or(0);
        let mut lines: Vec<String> = Vec::new();
        if !seq_items.is_empty() {
            lines.push(format!("{}{seq_note}", seq_items.join(", ")));
        }
        for (k, v) in &rec {
            let pad = width - k.chars().count();
            let v = indent_continuation(v, width + 3);
            lines.push(format!("{k}{} = {v}", " ".repeat(pad)));
        }
        if more_keys > 0 {
            lines.push(format!("… ({more_keys} more keys)"));
        }
        if top {
            lines.join("\n")
        } else {
            let body: Vec<String> = lines
                .iter()
                .map(|l| indent_continuation(&format!("  {l}"), 2))
                .collect();
            format!("{{\n{}\n}}", body.join("\n"))
        }
    }

    /// A record whose values are all vectors of one length, as columns.
    fn columns(&self, shape: &Shape) -> Option<String> {
        if shape.entry_count < 2 || shape.entry_count > 12 {
            return None;
        }
        let mut cols: Vec<(String, Vec<f64>)> = Vec::new();
        for (k, v) in &shape.entries {
            let Value::String(name) = k else { return None };
            let Value::UserData(ud) = v else { return None };
            let vec = ud.borrow::<Vector>().ok()?;
            cols.push((name.to_string_lossy().to_string(), vec.as_slice().to_vec()));
        }
        let rows = cols[0].1.len();
        if rows == 0 || cols.iter().any(|(_, c)| c.len() != rows) {
            return None;
        }
        let shown: Vec<Option<usize>> = if rows <= MAX_ROWS {
            (0..rows).map(Some).collect()
        } else {
            (0..MAX_ROWS - 4)
                .map(Some)
                .chain(std::iter::once(None))
                .chain((rows - 3..rows).map(Some))
                .collect()
        };
        let mut table: Vec<Vec<String>> = Vec::new();
        let mut header = vec!["#".to_string()];
        header.extend(cols.iter().map(|(k, _)| k.clone()));
        table.push(header);
        for r in &shown {
            let row = match r {
                Some(i) => {
                    let mut row = vec![(i + 1).to_string()];
                    row.extend(cols.iter().map(|(_, c)| fmt_number(c[*i])));
                    row
                }
                None => vec!["…".to_string(); cols.len() + 1],
            };
            table.push(row);
        }
        let widths: Vec<usize> = (0..=cols.len())
            .map(|j| {
                table
                    .iter()
                    .map(|r| r[j].chars().count())
                    .max()
                    .unwrap_or(0)
            })
            .collect();
        let mut out: Vec<String> = table
            .iter()
            .map(|r| {
                r.iter()
                    .zip(&widths)
                    .map(|(s, w)| format!("{}{s}", " ".repeat(w - s.chars().count())))
                    .collect::<Vec<_>>()
                    .join("  ")
            })
            .collect();
        if rows > MAX_ROWS {
            out.push(format!("({rows} rows)"));
        }
        Some(out.join("\n"))
    }

    fn key(&mut self, k: &Value) -> String {
        match k {
            Value::String(s) => {
                let b = s.as_bytes();
                if is_identifier(&b) {
                    String::from_utf8_lossy(&b).into_owned()
                } else {
                    format!("[{}]", quote(&b))
                }
            }
            Value::Table(_) => "[table]".into(),
            other => format!("[{}]", self.value(other, MAX_DEPTH, false)),
        }
    }
}

fn indent_continuation(s: &str, by: usize) -> String {
    if !s.contains('\n') {
        return s.to_string();
    }
    let pad = " ".repeat(by);
    let mut lines = s.lines();
    let mut out = lines.next().unwrap_or("").to_string();
    for l in lines {
        out.push('\n');
        out.push_str(&pad);
        out.push_str(l);
    }
    out
}

/// Whether `b` is a Lua identifier (and so can be written bare as a key).
pub fn is_identifier(b: &[u8]) -> bool {
    !b.is_empty()
        && (b[0].is_ascii_alphabetic() || b[0] == b'_')
        && b.iter().all(|c| c.is_ascii_alphanumeric() || *c == b'_')
        && !super::complete::KEYWORDS.contains(&std::str::from_utf8(b).unwrap_or(""))
}

/// Sort rank: known keys in their order, then other strings, then numbers,
/// then the rest.
fn key_rank(k: &Value) -> (u8, usize, String, i64) {
    match k {
        Value::String(s) => {
            let s = s.to_string_lossy().to_string();
            match KEY_ORDER.iter().position(|x| *x == s) {
                Some(p) => (0, p, String::new(), 0),
                None => (1, 0, s, 0),
            }
        }
        Value::Integer(i) => (2, 0, String::new(), *i),
        Value::Number(x) => (2, 0, String::new(), *x as i64),
        other => (3, 0, other.type_name().to_string(), 0),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_have_six_significant_digits() {
        assert_eq!(fmt_number(948.0512345), "948.051");
        assert_eq!(fmt_number(40.0), "40");
        assert_eq!(fmt_number(0.3348176), "0.334818");
        assert_eq!(fmt_number(-2.5), "-2.5");
        assert_eq!(fmt_number(1234567.8), "1234568");
        assert_eq!(fmt_number(1.5e-7), "1.5e-7");
        assert_eq!(fmt_number(0.0), "0");
        assert_eq!(fmt_number(f64::NAN), "nan");
        assert_eq!(fmt_number(-1e-9), "-1e-9");
    }

    #[test]
    fn long_vectors_are_abbreviated() {
        let v: Vec<f64> = (1..=100).map(f64::from).collect();
        assert_eq!(
            fmt_vector(&v),
            "vec{1, 2, 3, 4, 5, 6, …, 99, 100} (100 values)"
        );
        assert_eq!(fmt_vector(&[1.0, 2.5]), "vec{1, 2.5}");
    }
}
