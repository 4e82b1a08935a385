//! Completion over the live session: global names and keywords, fields
//! after `name.`, methods after `obj:` (from the help registry for meniscus
//! types, from the string library for strings), the keys a method accepts
//! inside its keyword table (`m:density{ab` → `abv`), and help topics
//! inside `help "…"`. Values are looked up with raw access only, so no
//! script code runs while completing.

use mlua::{Lua, Table, Value};

use super::help;
use super::mixture::MixtureUd;
use super::vector::Vector;

/// Lua's reserved words.
pub const KEYWORDS: [&str; 22] = [
    "and", "break", "do", "else", "elseif", "end", "false", "for", "function", "goto", "if", "in",
    "local", "nil", "not", "or", "repeat", "return", "then", "true", "until", "while",
];

fn is_word(c: char) -> bool {
    c.is_alphanumeric() || c == '_'
}

/// Candidates for the word ending at byte `pos` of `line`: (start of the
/// word, sorted candidates).
pub fn completions(lua: &Lua, line: &str, pos: usize) -> (usize, Vec<String>) {
    let mut pos = pos.min(line.len());
    while !line.is_char_boundary(pos) {
        pos -= 1;
    }
    let head = &line[..pos];

    if let Some(r) = help_topic(lua, head) {
        return r;
    }

    let start = head
        .char_indices()
        .rev()
        .take_while(|(_, c)| is_word(*c))
        .last()
        .map(|(i, _)| i)
        .unwrap_or(pos);
    let word = &head[start..];
    let before = &head[..start];

    let mut out: Vec<String> =
        if let Some(sep) = before.chars().last().filter(|c| *c == '.' || *c == ':') {
            let obj = &before[..before.len() - 1];
            if sep == ':' && ends_with_string_literal(obj) {
                string_methods(lua)
            } else {
                member_candidates(lua, object_path(obj), sep == ':')
            }
        } else if let Some(method) = open_keyword_table(before) {
            keys_for(lua, &method)
        } else {
            let mut v: Vec<String> = lua
                .globals()
                .pairs::<Value, Value>()
                .filter_map(|p| p.ok())
                .filter_map(|(k, _)| match k {
                    Value::String(s) => Some(s.to_string_lossy()),
                    _ => None,
                })
                .collect();
            v.extend(KEYWORDS.iter().map(|k| k.to_string()));
            v
        };
    out.retain(|c| c.starts_with(word) && !c.starts_with("__"));
    out.sort();
    out.dedup();
    (start, out)
}

/// The dotted name before a `.` or `:` (e.g. `a.b` in `x = a.b.c`).
fn object_path(before: &str) -> &str {
    let start = before
        .char_indices()
        .rev()
        .take_while(|(_, c)| is_word(*c) || *c == '.')
        .last()
        .map(|(i, _)| i)
        .unwrap_or(before.len());
    &before[start..]
}

/// `'abc'`, `("abc")`, `[[abc]]` and the like just before a `:`.
fn ends_with_string_literal(obj: &str) -> bool {
    let t = obj.trim_end();
    let t = t.strip_suffix(')').unwrap_or(t).trim_end();
    t.ends_with('"') || t.ends_with('\'') || t.ends_with("]]")
}

fn string_methods(lua: &Lua) -> Vec<String> {
    lua.globals()
        .raw_get::<Table>("string")
        .map(|t| table_keys(&t, true))
        .unwrap_or_default()
}

fn resolve(lua: &Lua, path: &str) -> Option<Value> {
    let mut cur = Value::Table(lua.globals());
    for part in path.split('.') {
        if part.is_empty() {
            return None;
        }
        cur = match cur {
            // Through read-only views (plugin namespaces and the tables
            // in them), which are empty themselves.
            Value::Table(t) => super::readonly::inner(lua, &t)
                .unwrap_or(t)
                .raw_get::<Value>(part)
                .ok()?,
            _ => return None,
        };
    }
    Some(cur)
}

fn methods_of(lua: &Lua, prefix: &str) -> Vec<String> {
    let p = format!("{prefix}:");
    help::entries(lua)
        .into_iter()
        .filter_map(|e| e.name.strip_prefix(&p).map(|s| s.to_string()))
        .collect()
}

fn table_keys(t: &Table, functions_only: bool) -> Vec<String> {
    t.pairs::<Value, Value>()
        .filter_map(|p| p.ok())
        .filter(|(_, v)| !functions_only || v.is_function())
        .filter_map(|(k, _)| match k {
            Value::String(s) => Some(s.to_string_lossy()),
            _ => None,
        })
        .collect()
}

fn member_candidates(lua: &Lua, path: &str, method: bool) -> Vec<String> {
    match resolve(lua, path) {
        Some(Value::Table(t)) => {
            // A read-only view (a plugin namespace) is empty itself.
            let t = super::readonly::inner(lua, &t).unwrap_or(t);
            table_keys(&t, method)
        }
        Some(Value::UserData(ud)) if ud.is::<MixtureUd>() => {
            let mut names = methods_of(lua, "mixture");
            // Fit-only methods (m:report, …) only where they work.
            if super::fit::fit_of(&Value::UserData(ud)).is_none() {
                names.retain(|n| !super::fit::FIT_METHODS.contains(&n.as_str()));
            }
            names
        }
        Some(Value::UserData(ud)) if ud.is::<Vector>() => methods_of(lua, "vector"),
        Some(Value::UserData(ud)) if ud.is::<super::sheet::SheetUd>() => methods_of(lua, "sheet"),
        Some(Value::String(_)) if method => string_methods(lua),
        _ => Vec::new(),
    }
}

/// If the cursor is where a key of a keyword table goes (just after `{` or
/// `,` inside an unclosed `{` that follows a call like `m:density`), the
/// called method's name.
fn open_keyword_table(before: &str) -> Option<String> {
    let trimmed = before.trim_end();
    if !(trimmed.ends_with('{') || trimmed.ends_with(',')) {
        return None;
    }
    // Find the unclosed `{` (ignoring nested pairs).
    let mut depth = 0i32;
    let mut open = None;
    for (i, c) in trimmed.char_indices().rev() {
        match c {
            '}' => depth += 1,
            '{' if depth == 0 => {
                open = Some(i);
                break;
            }
            '{' => depth -= 1,
            _ => {}
        }
    }
    let callee = trimmed[..open?].trim_end();
    let callee = callee.strip_suffix('(').unwrap_or(callee).trim_end();
    let name: String = callee
        .chars()
        .rev()
        .take_while(|c| is_word(*c))
        .collect::<Vec<_>>()
        .into_iter()
        .rev()
        .collect();
    let sep = callee[..callee.len() - name.len()].chars().last();
    (!name.is_empty() && matches!(sep, Some(':') | Some('.'))).then_some(name)
}

fn keys_for(lua: &Lua, method: &str) -> Vec<String> {
    let suffix_colon = format!(":{method}");
    let suffix_dot = format!(".{method}");
    help::entries(lua)
        .into_iter()
        .filter(|e| e.name.ends_with(&suffix_colon) || e.name.ends_with(&suffix_dot))
        .flat_map(|e| e.keys)
        .collect()
}

/// Inside `help "…` or `help("…`: help names.
fn help_topic(lua: &Lua, head: &str) -> Option<(usize, Vec<String>)> {
    let q = head.rfind(['"', '\''])?;
    let inside = &head[q + 1..];
    if inside.contains(['"', '\'']) {
        return None;
    }
    let pre = head[..q].trim_end();
    let pre = pre.strip_suffix('(').unwrap_or(pre).trim_end();
    if !pre.ends_with("help") {
        return None;
    }
    let mut v: Vec<String> = help::entries(lua)
        .into_iter()
        .map(|e| e.name)
        .filter(|n| n.starts_with(inside))
        .collect();
    v.sort();
    Some((q + 1, v))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keyword_table_callee_is_found() {
        assert_eq!(open_keyword_table("m:density{").as_deref(), Some("density"));
        assert_eq!(
            open_keyword_table("x = m:strength({density = 950, ").as_deref(),
            Some("strength")
        );
        assert_eq!(open_keyword_table("t = {"), None);
        assert_eq!(open_keyword_table("m:density{abv = 40}"), None);
    }

    #[test]
    fn object_path_takes_dotted_names() {
        assert_eq!(object_path("x = mixture"), "mixture");
        assert_eq!(object_path("print(a.b"), "a.b");
    }
}
