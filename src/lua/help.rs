//! The help registry: one entry (name, signature, doc) per function, method
//! or topic, added by each namespace's `register` with [`add_help`], shown
//! by the Lua function `help`, listed by completion. Names are written as
//! the user would: `linspace`, `mixture.ethanol_water`, `mixture:density`.
//! Entries may also carry the keyword-table keys a function accepts
//! ([`add_keys`]), which completion offers inside `{…}`.

use std::cell::RefCell;
use std::collections::BTreeMap;

use mlua::{Function, Lua, Table, Value};

use super::mixture::MixtureUd;
use super::sandbox::write_output;
use super::vector::Vector;

/// One help entry.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct HelpEntry {
    /// How the user writes it: `linspace`, `mixture:density`.
    pub name: String,
    /// Call signature with units, e.g. `m:density{abv=…, t=…} → kg/m³`.
    pub signature: String,
    /// What it does, units, validity, source, cautions.
    pub doc: String,
    /// Keys of the keyword table it accepts (for completion).
    pub keys: Vec<String>,
}

#[derive(Debug, Default)]
struct Registry {
    entries: BTreeMap<String, HelpEntry>,
}

const KEY_TAGS: &str = "meniscus.help.tags";

fn with_registry<R>(lua: &Lua, f: impl FnOnce(&mut Registry) -> R) -> R {
    if lua.app_data_ref::<RefCell<Registry>>().is_none() {
        lua.set_app_data(RefCell::new(Registry::default()));
    }
    let reg = lua
        .app_data_ref::<RefCell<Registry>>()
        .expect("help registry just set");
    let mut r = reg.borrow_mut();
    f(&mut r)
}

/// Adds (or replaces) a help entry.
pub fn add_help(lua: &Lua, name: &str, signature: &str, doc: &str) -> mlua::Result<()> {
    with_registry(lua, |r| {
        let keys = r
            .entries
            .get(name)
            .map(|e| e.keys.clone())
            .unwrap_or_default();
        r.entries.insert(
            name.to_string(),
            HelpEntry {
                name: name.to_string(),
                signature: signature.to_string(),
                doc: doc.to_string(),
                keys,
            },
        );
    });
    Ok(())
}

/// Records the keyword-table keys an entry's function accepts.
pub fn add_keys(lua: &Lua, name: &str, keys: &[&str]) -> mlua::Result<()> {
    with_registry(lua, |r| {
        let e = r
            .entries
            .entry(name.to_string())
            .or_insert_with(|| HelpEntry {
                name: name.to_string(),
                signature: name.to_string(),
                doc: String::new(),
                keys: Vec::new(),
            });
        e.keys = keys.iter().map(|k| k.to_string()).collect();
    });
    Ok(())
}

/// All entries, sorted by name.
pub fn entries(lua: &Lua) -> Vec<HelpEntry> {
    with_registry(lua, |r| r.entries.values().cloned().collect())
}

/// The entry with exactly this name.
pub fn entry(lua: &Lua, name: &str) -> Option<HelpEntry> {
    with_registry(lua, |r| r.entries.get(name).cloned())
}

fn tags(lua: &Lua) -> mlua::Result<Table> {
    if let Ok(t) = lua.named_registry_value::<Table>(KEY_TAGS) {
        return Ok(t);
    }
    let t = lua.create_table()?;
    let mt = lua.create_table()?;
    mt.raw_set("__mode", "k")?;
    t.set_metatable(Some(mt))?;
    lua.set_named_registry_value(KEY_TAGS, t.clone())?;
    Ok(t)
}

/// Ties a Lua value (a function or namespace table) to a help entry, so
/// that `help(value)` finds it.
pub fn tag(lua: &Lua, value: Value, name: &str) -> mlua::Result<()> {
    tags(lua)?.raw_set(value, name)
}

/// Sets each `(name, function)` as field `name` of `ns` and tags the
/// function `prefix.name` for help.
pub fn set_tagged(
    lua: &Lua,
    ns: &Table,
    prefix: &str,
    fns: Vec<(&str, Function)>,
) -> mlua::Result<()> {
    for (name, f) in fns {
        ns.set(name, f.clone())?;
        tag(lua, Value::Function(f), &format!("{prefix}.{name}"))?;
    }
    Ok(())
}

/// The help name tied to a function, if any.
pub fn function_name(lua: &Lua, f: &Function) -> Option<String> {
    tags(lua).ok()?.raw_get::<Option<String>>(f.clone()).ok()?
}

fn tagged_name(lua: &Lua, v: &Value) -> Option<String> {
    tags(lua).ok()?.raw_get::<Option<String>>(v.clone()).ok()?
}

fn render(e: &HelpEntry) -> String {
    let mut out = e.signature.clone();
    if !e.doc.is_empty() {
        for line in e.doc.lines() {
            out.push_str("\n  ");
            out.push_str(line);
        }
    }
    if !e.keys.is_empty() {
        out.push_str(&format!("\n  Keys: {}", e.keys.join(", ")));
    }
    out
}

/// The help text for a name: the exact entry, or the entries whose last
/// part matches (`density` finds `mixture:density`), or suggestions.
pub fn help_text(lua: &Lua, query: &str) -> String {
    let query = query.trim();
    if query.is_empty() {
        return overview(lua);
    }
    let all = entries(lua);
    if let Some(e) = all.iter().find(|e| e.name == query) {
        return render(e);
    }
    let tail_matches: Vec<&HelpEntry> = all
        .iter()
        .filter(|e| {
            e.name
                .rsplit(['.', ':'])
                .next()
                .is_some_and(|last| last == query)
        })
        .collect();
    match tail_matches.len() {
        1 => return render(tail_matches[0]),
        n if n > 1 => {
            return tail_matches
                .iter()
                .map(|e| render(e))
                .collect::<Vec<_>>()
                .join("\n\n")
        }
        _ => {}
    }
    let similar: Vec<&str> = all
        .iter()
        .filter(|e| e.name.contains(query))
        .map(|e| e.name.as_str())
        .take(12)
        .collect();
    if similar.is_empty() {
        format!("no help for '{query}'; help() lists the topics")
    } else {
        format!("no help for '{query}'; see: {}", similar.join(", "))
    }
}

fn overview(lua: &Lua) -> String {
    let all = entries(lua);
    let mut groups: BTreeMap<String, Vec<String>> = BTreeMap::new();
    for e in &all {
        let group = match e.name.find(['.', ':']) {
            Some(p) => e.name[..p].to_string(),
            None => String::new(),
        };
        groups.entry(group).or_default().push(e.name.clone());
    }
    let mut out = String::from(
        "meniscus: volumetrics of liquid mixtures, scripted in Lua 5.4.\n\
         help \"name\" or help(value) for one function; for example help \"mixture\".\n",
    );
    for (group, names) in groups {
        let title = if group.is_empty() {
            "functions"
        } else {
            &group
        };
        out.push_str(&format!(
            "\n{title}:\n  {}",
            wrap(&names.join("  "), 76, "  ")
        ));
    }
    out
}

fn wrap(text: &str, width: usize, indent: &str) -> String {
    let mut out = String::new();
    let mut col = 0;
    for word in text.split("  ") {
        if col > 0 && col + word.len() + 2 > width {
            out.push('\n');
            out.push_str(indent);
            col = 0;
        } else if col > 0 {
            out.push_str("  ");
            col += 2;
        }
        out.push_str(word);
        col += word.len();
    }
    out
}

/// The help text for a Lua value given to `help(…)`.
pub fn help_for_value(lua: &Lua, v: &Value) -> String {
    match v {
        Value::Nil => overview(lua),
        Value::String(s) => help_text(lua, &s.to_string_lossy()),
        Value::UserData(ud) if ud.is::<MixtureUd>() => help_text(lua, "mixture"),
        Value::UserData(ud) if ud.is::<Vector>() => help_text(lua, "vector"),
        Value::UserData(ud) if ud.is::<super::sheet::SheetUd>() => help_text(lua, "sheet"),
        other => match tagged_name(lua, other) {
            Some(name) => help_text(lua, &name),
            None => format!(
                "no help for this {}; help() lists the topics",
                other.type_name()
            ),
        },
    }
}

/// Registers the global `help`.
pub fn register(lua: &Lua) -> mlua::Result<()> {
    let help = lua.create_function(|lua, v: Option<Value>| {
        let mut text = help_for_value(lua, &v.unwrap_or(Value::Nil));
        text.push('\n');
        write_output(lua, &text);
        Ok(())
    })?;
    lua.globals().set("help", help.clone())?;
    add_help(
        lua,
        "help",
        "help(), help \"name\", help(value)",
        "Shows what a function does: signature, units, validity range, source.\n\
         help() lists every topic.",
    )?;
    tag(lua, Value::Function(help), "help")?;
    add_help(
        lua,
        "show",
        "show(value, …)",
        "Prints values readably: numbers to 6 significant digits, tables as\n\
         aligned key = value lines, vectors abbreviated.",
    )?;
    add_help(
        lua,
        "print",
        "print(value, …)",
        "Lua's print; tables and vectors are shown readably instead of as an\n\
         address.",
    )?;
    add_help(
        lua,
        "load",
        "load(text [, name [, mode [, env]]]) → function | nil, message",
        "Compiles Lua source text. Only text is accepted: binary chunks and\n\
         reader functions are refused.",
    )?;
    let g = lua.globals();
    for name in ["show", "print", "load"] {
        if let Ok(v) = g.get::<Value>(name) {
            tag(lua, v, name)?;
        }
    }
    Ok(())
}
