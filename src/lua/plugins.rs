//! The plugin host: Lua files that add a namespace of site-specific
//! functions (a distillery's tank register, a plant's own corrections).
//!
//! A plugin is a Lua file (`NAME.lua`, or `NAME/init.lua`) that returns
//!
//! ```lua
//! return {
//!   name = "cellar",            -- the global it becomes: a Lua identifier
//!   version = "1.2.0",          -- the plugin's own version, a string
//!   api = 1,                    -- the plugin API it was written for
//!   description = "…",
//!   functions = {
//!     dip_volume = {
//!       fn = function(tank, dip_mm) … end,
//!       doc = "Volume in a tank from a dip reading.",
//!       args = { { name = "tank", doc = "tank code" },
//!                { name = "dip_mm", unit = "mm", doc = "dip depth" } },
//!     },
//!   },
//! }
//! ```
//!
//! Plugins are searched in `./plugins`, then `<config dir>/meniscus/plugins`,
//! then each `--plugins DIR`, files in name order. Each valid plugin
//! becomes a read-only global namespace (`cellar.dip_volume(…)`), with help
//! entries, completion, and use from sheet formulas. A plugin with a bad or
//! taken name, a missing or malformed field, another API version, or an
//! error while loading is reported (path, reason, what to change) and
//! skipped; the others load.
//!
//! Isolation: each plugin file runs in its own environment (see
//! [`super::readonly`]): its globals are its own, shared tables (the
//! libraries, meniscus namespaces, other plugins) are read-only views, and
//! its namespace is frozen, so one plugin cannot change what another — or
//! the user's script — sees. Plugins run under the host's sandbox, memory
//! limit and time budget.

use std::cell::RefCell;
use std::collections::HashSet;
use std::path::{Path, PathBuf};
use std::rc::Rc;

use mlua::chunk::ChunkMode;
use mlua::{Function, Lua, Table, Value};

use super::complete::KEYWORDS;
use super::convert::describe_value;
use super::errors::runtime;
use super::format::is_identifier;
use super::help::{add_help, tag};

/// The plugin API version this meniscus provides. It changes only when a
/// plugin written for the previous version could stop working; new,
/// optional additions keep the number.
pub const API_VERSION: i64 = 1;

/// Largest plugin file read (bytes).
pub const MAX_PLUGIN_BYTES: u64 = 4 * 1024 * 1024;

/// A loaded plugin, as `plugins()` and `:plugins` list it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PluginInfo {
    /// Its global name.
    pub name: String,
    /// Its own version string.
    pub version: String,
    /// One-line description.
    pub description: String,
    /// The file it was loaded from.
    pub path: PathBuf,
    /// The plugin API version it declared.
    pub api: i64,
    /// Its function names, sorted.
    pub functions: Vec<String>,
}

/// A plugin file that was skipped, and why.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct PluginProblem {
    /// The plugin file.
    pub path: PathBuf,
    /// What is wrong and what to change.
    pub message: String,
}

impl std::fmt::Display for PluginProblem {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "plugin {} skipped: {}",
            self.path.display(),
            self.message
        )
    }
}

/// The loaded plugins, kept in the Lua state for `plugins()`.
#[derive(Debug, Default)]
pub struct Loaded(pub RefCell<Vec<PluginInfo>>);

/// The user's plugin directory: `<config dir>/meniscus/plugins`.
pub fn user_plugin_dir() -> Option<PathBuf> {
    dirs::config_dir().map(|d| d.join("meniscus").join("plugins"))
}

/// The directories searched, in order: `./plugins` and the user's plugin
/// directory (when `standard` is set), then `extra`. A directory listed
/// twice is searched once.
pub fn search_dirs(standard: bool, extra: &[PathBuf]) -> Vec<PathBuf> {
    let mut dirs = Vec::new();
    if standard {
        dirs.push(PathBuf::from("./plugins"));
        if let Some(d) = user_plugin_dir() {
            dirs.push(d);
        }
    }
    dirs.extend(extra.iter().cloned());
    let mut seen = HashSet::new();
    dirs.retain(|d| seen.insert(d.canonicalize().unwrap_or_else(|_| d.clone())));
    dirs
}

/// Plugin files in one directory: `*.lua` files and subdirectories with an
/// `init.lua`, sorted by name.
pub fn plugin_files(dir: &Path) -> std::io::Result<Vec<PathBuf>> {
    let mut out = Vec::new();
    for entry in std::fs::read_dir(dir)? {
        let path = entry?.path();
        if path.is_dir() {
            let init = path.join("init.lua");
            if init.is_file() {
                out.push(init);
            }
        } else if path.extension().is_some_and(|e| e == "lua") {
            out.push(path);
        }
    }
    out.sort();
    Ok(out)
}

/// Names a plugin may not take: every global present before plugins load,
/// every help topic, Lua's keywords, and `arg` (set for scripts).
pub fn reserved_names(lua: &Lua) -> HashSet<String> {
    let mut names: HashSet<String> = lua
        .globals()
        .pairs::<Value, Value>()
        .filter_map(|p| p.ok())
        .filter_map(|(k, _)| k.as_string().map(|s| s.to_string_lossy()))
        .collect();
    for e in super::help::entries(lua) {
        let root = e.name.split(['.', ':']).next().unwrap_or("").to_string();
        names.insert(root);
    }
    names.extend(KEYWORDS.iter().map(|k| k.to_string()));
    names.insert("arg".into());
    names
}

const PLUGIN_FIELDS: [&str; 5] = ["name", "version", "api", "description", "functions"];
const FUNCTION_FIELDS: [&str; 3] = ["fn", "doc", "args"];
const ARG_FIELDS: [&str; 3] = ["name", "unit", "doc"];

fn invalid(msg: impl std::fmt::Display) -> mlua::Error {
    runtime(msg)
}

/// Refuses keys outside `allowed`; `what` names the table in the message.
fn check_keys(t: &Table, allowed: &[&str], what: &str) -> mlua::Result<()> {
    let mut bad: Option<String> = None;
    t.for_each::<Value, Value>(|k, _| {
        let ok = match &k {
            Value::String(s) => allowed.iter().any(|a| a.as_bytes() == &*s.as_bytes()),
            _ => false,
        };
        if !ok && bad.is_none() {
            bad = Some(match &k {
                Value::String(s) => format!("'{}'", s.to_string_lossy()),
                other => describe_value(other),
            });
        }
        Ok(())
    })?;
    match bad {
        None => Ok(()),
        Some(k) => Err(invalid(format!(
            "{what} has an unknown field {k} (the fields are: {})",
            allowed.join(", ")
        ))),
    }
}

fn text_field(t: &Table, key: &str, what: &str, hint: &str) -> mlua::Result<String> {
    match t.raw_get::<Value>(key)? {
        Value::String(s) if !s.to_string_lossy().trim().is_empty() => Ok(s.to_string_lossy()),
        Value::Nil => Err(invalid(format!(
            "{what} has no field '{key}'; add {key} = {hint}"
        ))),
        other => Err(invalid(format!(
            "{what}: '{key}' must be a non-empty string like {hint}, got {}",
            describe_value(&other)
        ))),
    }
}

/// Checks the plugin's declared API version first: a plugin for another
/// version may have other fields, and the version is what to fix.
fn check_api(t: &Table) -> mlua::Result<i64> {
    match t.raw_get::<Value>("api")? {
        Value::Integer(v) if v == API_VERSION => Ok(v),
        Value::Number(x) if x == API_VERSION as f64 => Ok(API_VERSION),
        Value::Integer(v) => Err(invalid(format!(
            "it was written for plugin api {v}, but this meniscus provides api {API_VERSION}; \
             use a version of the plugin written for api {API_VERSION} (or a meniscus that provides api {v})"
        ))),
        Value::Nil => Err(invalid(format!(
            "the plugin table has no field 'api'; add api = {API_VERSION} (the plugin API \
             version it was written for)"
        ))),
        other => Err(invalid(format!(
            "'api' must be a whole number (this meniscus provides api {API_VERSION}), got {}",
            describe_value(&other)
        ))),
    }
}

fn check_name(
    t: &Table,
    reserved: &HashSet<String>,
    loaded: &[PluginInfo],
) -> mlua::Result<String> {
    let name = text_field(t, "name", "the plugin table", "\"my_site\"")?;
    if !is_identifier(name.as_bytes()) || KEYWORDS.contains(&name.as_str()) {
        let suggestion: String = name
            .chars()
            .map(|c| if c.is_ascii_alphanumeric() { c } else { '_' })
            .collect();
        let suggestion = if suggestion.starts_with(|c: char| c.is_ascii_digit()) {
            format!("p_{suggestion}")
        } else {
            suggestion
        };
        return Err(invalid(format!(
            "name \"{name}\" is not a Lua identifier (ASCII letters, digits and _, not starting \
             with a digit, not a keyword); rename it, e.g. \"{suggestion}\""
        )));
    }
    if name.starts_with('_') {
        return Err(invalid(format!(
            "name \"{name}\" starts with _, which is reserved; choose a name starting with a letter"
        )));
    }
    if reserved.contains(&name) {
        return Err(invalid(format!(
            "name \"{name}\" is taken by a built-in global; choose another name"
        )));
    }
    if let Some(p) = loaded.iter().find(|p| p.name == name) {
        return Err(invalid(format!(
            "name \"{name}\" is already used by the plugin loaded from {}; rename one of them",
            p.path.display()
        )));
    }
    Ok(name)
}

/// One `functions` entry: the function and its help text.
struct PluginFunction {
    name: String,
    func: Function,
    signature: String,
    doc: String,
}

fn check_function(plugin: &str, fname: &str, v: Value) -> mlua::Result<PluginFunction> {
    let what = format!("functions.{fname}");
    let Value::Table(t) = v else {
        return Err(invalid(format!(
            "{what} must be a table {{fn = function(…) … end, doc = \"…\", args = {{…}}}}, got {}",
            describe_value(&v)
        )));
    };
    check_keys(&t, &FUNCTION_FIELDS, &what)?;
    let func = match t.raw_get::<Value>("fn")? {
        Value::Function(f) => f,
        Value::Nil => {
            return Err(invalid(format!(
                "{what} has no field 'fn'; add fn = function(…) … end"
            )))
        }
        other => {
            return Err(invalid(format!(
                "{what}.fn must be a function, got {}",
                describe_value(&other)
            )))
        }
    };
    let doc = text_field(&t, "doc", &what, "\"what it computes, in which units\"")?;
    let args = match t.raw_get::<Value>("args")? {
        Value::Table(a) => a,
        Value::Nil => {
            return Err(invalid(format!(
            "{what} has no field 'args'; list the arguments, e.g. args = {{ {{name = \"dip_mm\", \
                 unit = \"mm\", doc = \"dip depth\"}} }} (args = {{}} for none)"
        )))
        }
        other => {
            return Err(invalid(format!(
                "{what}.args must be a list of {{name = …, unit = …, doc = …}}, got {}",
                describe_value(&other)
            )))
        }
    };
    let n = args.raw_len();
    let mut count = 0;
    args.for_each::<Value, Value>(|_, _| {
        count += 1;
        Ok(())
    })?;
    if count != n {
        return Err(invalid(format!(
            "{what}.args must be a list (keys 1, 2, …) of {{name = …, unit = …, doc = …}}"
        )));
    }
    let mut arg_names = Vec::new();
    let mut arg_docs = Vec::new();
    for i in 1..=n {
        let a_what = format!("{what}.args[{i}]");
        let Value::Table(a) = args.raw_get::<Value>(i)? else {
            return Err(invalid(format!(
                "{a_what} must be a table {{name = …, unit = …, doc = …}}"
            )));
        };
        check_keys(&a, &ARG_FIELDS, &a_what)?;
        let an = text_field(&a, "name", &a_what, "\"dip_mm\"")?;
        let ad = text_field(&a, "doc", &a_what, "\"what the argument is\"")?;
        let unit = match a.raw_get::<Value>("unit")? {
            Value::Nil => None,
            Value::String(s) => Some(s.to_string_lossy()),
            other => {
                return Err(invalid(format!(
                    "{a_what}.unit must be a string like \"mm\", got {}",
                    describe_value(&other)
                )))
            }
        };
        arg_docs.push(match &unit {
            Some(u) => format!("  {an} ({u}): {ad}"),
            None => format!("  {an}: {ad}"),
        });
        arg_names.push(an);
    }
    let mut full_doc = doc;
    if !arg_docs.is_empty() {
        full_doc.push_str("\nArguments:\n");
        full_doc.push_str(&arg_docs.join("\n"));
    }
    Ok(PluginFunction {
        name: fname.to_string(),
        func,
        signature: format!("{plugin}.{fname}({})", arg_names.join(", ")),
        doc: full_doc,
    })
}

/// Loads one plugin file into `lua`: runs it in a private environment,
/// validates what it returns and installs its namespace. A validation
/// failure or a Lua error is returned as the reason to skip it.
pub fn load_plugin(
    lua: &Lua,
    path: &Path,
    reserved: &HashSet<String>,
    loaded: &[PluginInfo],
) -> mlua::Result<PluginInfo> {
    let meta =
        std::fs::metadata(path).map_err(|e| invalid(format!("cannot read the file: {e}")))?;
    if meta.len() > MAX_PLUGIN_BYTES {
        return Err(invalid(format!(
            "the file is {} bytes, more than the {MAX_PLUGIN_BYTES} a plugin may be",
            meta.len()
        )));
    }
    let source =
        std::fs::read_to_string(path).map_err(|e| invalid(format!("cannot read the file: {e}")))?;
    let env = super::readonly::private_env(lua, false)?;
    let chunk = lua
        .load(source)
        .set_name(format!("@{}", path.display()))
        .set_mode(ChunkMode::Text)
        .set_environment(env)
        .into_function()?;
    let returned: Value = chunk.call(())?;
    let Value::Table(t) = returned else {
        return Err(invalid(format!(
            "the file must return the plugin table (return {{ name = …, version = …, api = {API_VERSION}, \
             description = …, functions = {{…}} }}), but it returned {}",
            describe_value(&returned)
        )));
    };
    let api = check_api(&t)?;
    check_keys(&t, &PLUGIN_FIELDS, "the plugin table")?;
    let name = check_name(&t, reserved, loaded)?;
    let version = text_field(&t, "version", "the plugin table", "\"1.0.0\"")?;
    let description = text_field(
        &t,
        "description",
        "the plugin table",
        "\"what the plugin is for\"",
    )?;
    let funcs = match t.raw_get::<Value>("functions")? {
        Value::Table(f) => f,
        Value::Nil => {
            return Err(invalid(
                "the plugin table has no field 'functions'; add functions = { name = { fn = …, doc = …, args = {…} } }",
            ))
        }
        other => {
            return Err(invalid(format!(
                "'functions' must be a table of named functions, got {}",
                describe_value(&other)
            )))
        }
    };
    let mut entries: Vec<(String, Value)> = Vec::new();
    let mut bad_key: Option<String> = None;
    funcs.for_each::<Value, Value>(|k, v| {
        match &k {
            Value::String(s) if is_identifier(&s.as_bytes()) => {
                entries.push((s.to_string_lossy(), v));
            }
            other => {
                if bad_key.is_none() {
                    bad_key = Some(describe_value(other));
                }
            }
        }
        Ok(())
    })?;
    if let Some(k) = bad_key {
        return Err(invalid(format!(
            "'functions' keys must be function names (Lua identifiers), got {k}"
        )));
    }
    if entries.is_empty() {
        return Err(invalid(
            "'functions' is empty; a plugin provides at least one function",
        ));
    }
    entries.sort_by(|a, b| a.0.cmp(&b.0));
    let mut functions = Vec::with_capacity(entries.len());
    for (fname, v) in entries {
        functions.push(check_function(&name, &fname, v)?);
    }

    // Valid: install a frozen namespace and its help.
    let inner = lua.create_table()?;
    for f in &functions {
        inner.raw_set(f.name.as_str(), f.func.clone())?;
    }
    let ns = super::readonly::view(lua, &inner)?;
    lua.globals().raw_set(name.as_str(), ns.clone())?;
    tag(lua, Value::Table(ns), &name)?;
    let origin = format!(
        "Plugin {name} {version} (api {api}), from {}",
        path.display()
    );
    let names: Vec<String> = functions.iter().map(|f| f.name.clone()).collect();
    add_help(
        lua,
        &name,
        &format!("{name} (plugin)"),
        &format!(
            "{description}\nFunctions: {}.\n{origin}",
            names
                .iter()
                .map(|n| format!("{name}.{n}"))
                .collect::<Vec<_>>()
                .join(", ")
        ),
    )?;
    for f in &functions {
        let help_name = format!("{name}.{}", f.name);
        add_help(
            lua,
            &help_name,
            &f.signature,
            &format!("{}\n{origin}", f.doc),
        )?;
        tag(lua, Value::Function(f.func.clone()), &help_name)?;
    }
    Ok(PluginInfo {
        name,
        version,
        description,
        path: path.to_path_buf(),
        api,
        functions: names,
    })
}

/// Records the loaded plugins for `plugins()`.
pub fn set_loaded(lua: &Lua, plugins: Vec<PluginInfo>) {
    match lua.app_data_ref::<Rc<Loaded>>() {
        Some(l) => *l.0.borrow_mut() = plugins,
        None => {
            lua.set_app_data(Rc::new(Loaded(RefCell::new(plugins))));
        }
    }
}

/// Registers the global `plugins()` and its help.
pub fn register(lua: &Lua) -> mlua::Result<()> {
    set_loaded(lua, Vec::new());
    let f = lua.create_function(|lua, ()| {
        let list = lua
            .app_data_ref::<Rc<Loaded>>()
            .map(|l| l.0.borrow().clone())
            .unwrap_or_default();
        let out = lua.create_table_with_capacity(list.len(), 0)?;
        for (i, p) in list.iter().enumerate() {
            let t = lua.create_table()?;
            t.raw_set("name", p.name.as_str())?;
            t.raw_set("version", p.version.as_str())?;
            t.raw_set("description", p.description.as_str())?;
            t.raw_set("path", p.path.display().to_string())?;
            t.raw_set("api", p.api)?;
            t.raw_set(
                "functions",
                lua.create_sequence_from(p.functions.iter().map(String::as_str))?,
            )?;
            out.raw_set(i + 1, t)?;
        }
        Ok(out)
    })?;
    lua.globals().raw_set("plugins", f.clone())?;
    tag(lua, Value::Function(f), "plugins")?;
    add_help(
        lua,
        "plugins",
        "plugins() → {{name, version, description, path, api, functions}, …}",
        &format!(
            "The plugins loaded in this session. A plugin is a Lua file in ./plugins,\n\
             the user's config directory (…/meniscus/plugins) or a --plugins DIR that\n\
             returns {{name = \"id\", version = \"1.0\", api = {API_VERSION}, description = \"…\",\n\
             functions = {{f = {{fn = function(…) … end, doc = \"…\", args = {{{{name = \"x\",\n\
             unit = \"mm\", doc = \"…\"}}}}}}}}}}. Each becomes a read-only global namespace\n\
             (name.f(…)), usable in sheet formulas. A plugin that does not load is\n\
             reported on stderr with the reason and skipped."
        ),
    )?;
    Ok(())
}
