//! The sandbox: which parts of Lua a script gets, and the base functions
//! meniscus replaces.
//!
//! Only the table, string, math, utf8 and coroutine libraries are loaded;
//! `dofile`, `loadfile`, `collectgarbage` and `string.dump` are removed and
//! `load` accepts text only; the string metatable is protected. `pcall`,
//! `setmetatable` refuses `__gc` finalizers (Lua runs them with hooks off,
//! out of reach of the time limit). `pcall`,
//! `xpcall` and `coroutine.resume` are wrapped so that errors raised by
//! meniscus functions come back as one-line `file:line: message` strings,
//! a stopped evaluation (time limit, Ctrl-C) cannot be caught, and a Rust
//! panic inside a coroutine is not hidden. `print` shows tables and vectors
//! readably; `show` pretty-prints.

use std::cell::{Cell, RefCell};
use std::io::Write;
use std::rc::Rc;

use mlua::chunk::ChunkMode;
use mlua::{Function, Lua, LuaOptions, MultiValue, StdLib, Table, Value, Variadic};

use super::errors::{describe, runtime};
use super::format::{fmt_vector, format_nested, format_value};
use super::limits::Budget;
use super::vector::Vector;

/// The standard libraries a script gets.
pub fn libs() -> StdLib {
    StdLib::TABLE | StdLib::STRING | StdLib::MATH | StdLib::UTF8 | StdLib::COROUTINE
}

/// A new Lua state with the safe libraries only; panics in Rust callbacks
/// are not catchable by `pcall`.
pub fn new_state() -> mlua::Result<Lua> {
    Lua::new_with(libs(), LuaOptions::new().catch_rust_panics(false))
}

/// Where `print`, `show` and `help` write.
#[derive(Debug, Default)]
pub enum Output {
    /// Standard output (the default).
    #[default]
    Stdout,
    /// Collected in memory (tests, embedders).
    Capture(String),
}

/// Writes text to the host's output.
pub fn write_output(lua: &Lua, text: &str) {
    if let Some(out) = lua.app_data_ref::<RefCell<Output>>() {
        match &mut *out.borrow_mut() {
            Output::Stdout => {
                let mut so = std::io::stdout().lock();
                let _ = so.write_all(text.as_bytes());
                let _ = so.flush();
            }
            Output::Capture(s) => s.push_str(text),
        }
    } else {
        print!("{text}");
    }
}

const KEY_TOSTRING: &str = "meniscus.original.tostring";
const KEY_IPAIRS: &str = "meniscus.original.ipairs";

/// `tostring(v)` with the original function (a script may have replaced
/// the global).
pub fn original_tostring(lua: &Lua, v: &Value) -> mlua::Result<String> {
    let f: Function = lua.named_registry_value(KEY_TOSTRING)?;
    let s: mlua::LuaString = f.call(v.clone())?;
    Ok(s.to_string_lossy())
}

/// How deeply display functions (`print`, `show`, `tostring` of values
/// that call them back) may nest: each level holds Rust stack.
const MAX_DISPLAY_NESTING: u32 = 16;

struct DisplayNesting(Rc<Cell<u32>>);

impl DisplayNesting {
    fn enter(lua: &Lua) -> mlua::Result<DisplayNesting> {
        let c = lua
            .app_data_ref::<Rc<Cell<u32>>>()
            .map(|c| c.clone())
            .unwrap_or_default();
        if c.get() >= MAX_DISPLAY_NESTING {
            return Err(runtime(
                "display calls nested too deeply (a __tostring that prints itself?)",
            ));
        }
        c.set(c.get() + 1);
        Ok(DisplayNesting(c))
    }
}

impl Drop for DisplayNesting {
    fn drop(&mut self) {
        self.0.set(self.0.get().saturating_sub(1));
    }
}

/// Display of one value for `print`: Lua's own `tostring` for strings,
/// numbers and anything with a `__tostring`; readable text for plain
/// tables and vectors instead of an address.
fn print_text(lua: &Lua, v: &Value) -> mlua::Result<String> {
    match v {
        Value::Table(t) if !has_tostring(t) => Ok(format_nested(lua, v)),
        Value::UserData(ud) => match ud.borrow::<Vector>() {
            Ok(vec) => Ok(fmt_vector(vec.as_slice())),
            Err(_) => original_tostring(lua, v),
        },
        _ => original_tostring(lua, v),
    }
}

fn has_tostring(t: &Table) -> bool {
    t.metatable()
        .and_then(|mt| mt.raw_get::<Value>("__tostring").ok())
        .map(|v| !v.is_nil())
        .unwrap_or(false)
}

/// Text of several values for `show` and the REPL, one per line.
pub fn show_text(lua: &Lua, values: &[Value]) -> String {
    values
        .iter()
        .map(|v| format_value(lua, v))
        .collect::<Vec<_>>()
        .join("\n")
}

/// Sets up the sandbox on a fresh state made by [`new_state`].
pub fn setup(lua: &Lua, budget: Rc<Budget>) -> mlua::Result<()> {
    lua.set_app_data(RefCell::new(Output::Stdout));
    lua.set_app_data(Rc::new(Cell::new(0u32)));
    let g = lua.globals();
    for name in ["dofile", "loadfile", "load", "collectgarbage", "require"] {
        g.raw_set(name, Value::Nil)?;
    }
    let string: Table = g.raw_get("string")?;
    string.raw_set("dump", Value::Nil)?;

    lua.set_named_registry_value(KEY_TOSTRING, g.raw_get::<Function>("tostring")?)?;
    lua.set_named_registry_value(KEY_IPAIRS, g.raw_get::<Function>("ipairs")?)?;

    // A script must not reach the metatable shared by every string.
    lua.load("getmetatable('').__metatable = false")
        .set_name("=(meniscus)")
        .set_mode(ChunkMode::Text)
        .exec()?;

    g.raw_set("load", lua.create_function(safe_load)?)?;

    // Lua runs `__gc` finalizers with hooks switched off, so a finalizer
    // that loops could not be stopped by the time limit or Ctrl-C. An
    // object is marked for finalization only if its metatable has a
    // `__gc` field when `setmetatable` is called: refuse such metatables.
    let raw_setmetatable: Function = g.raw_get("setmetatable")?;
    g.raw_set(
        "setmetatable",
        lua.create_function(move |_, (t, mt): (Value, Value)| {
            if !t.is_table() {
                return Err(runtime(format!(
                    "setmetatable: the first argument must be a table, got {}",
                    super::convert::describe_value(&t)
                )));
            }
            if let Value::Table(m) = &mt {
                if !m.raw_get::<Value>("__gc")?.is_nil() {
                    return Err(runtime(
                        "setmetatable: __gc finalizers are not allowed in scripts \
                         (they would run where the time limit cannot stop them)",
                    ));
                }
            }
            raw_setmetatable.call::<Value>((t, mt))
        })?,
    )?;

    // Error values coming back from pcall/xpcall/resume: readable strings,
    // and a stopped evaluation re-raised.
    let clean = lua.create_function(move |lua, args: MultiValue| {
        if let Some(msg) = budget.stopped() {
            return Err(runtime(msg));
        }
        let mut vals: Vec<Value> = args.into_iter().collect();
        if let (Some(Value::Boolean(false)), Some(Value::Error(e))) = (vals.first(), vals.get(1)) {
            let text = describe(e).message;
            vals[1] = Value::String(lua.create_string(&text)?);
        }
        Ok(MultiValue::from_iter(vals))
    })?;
    let co: Table = g.raw_get("coroutine")?;
    let wrap: Function = lua
        .load(
            "local raw_pcall, raw_xpcall, raw_resume, clean = ...\n\
             return function(f, ...) return clean(raw_pcall(f, ...)) end,\n\
                    function(f, h, ...) return clean(raw_xpcall(f, h, ...)) end,\n\
                    function(co, ...) return clean(raw_resume(co, ...)) end",
        )
        .set_name("=(meniscus)")
        .set_mode(ChunkMode::Text)
        .into_function()?;
    let (pcall, xpcall, resume): (Function, Function, Function) = wrap.call((
        g.raw_get::<Function>("pcall")?,
        g.raw_get::<Function>("xpcall")?,
        co.raw_get::<Function>("resume")?,
        clean,
    ))?;
    g.raw_set("pcall", pcall)?;
    g.raw_set("xpcall", xpcall)?;
    co.raw_set("resume", resume)?;

    g.raw_set(
        "print",
        lua.create_function(|lua, args: Variadic<Value>| {
            let _n = DisplayNesting::enter(lua)?;
            let mut parts = Vec::with_capacity(args.len());
            for v in args.iter() {
                parts.push(print_text(lua, v)?);
            }
            let mut line = parts.join("\t");
            line.push('\n');
            write_output(lua, &line);
            Ok(())
        })?,
    )?;
    g.raw_set(
        "show",
        lua.create_function(|lua, args: Variadic<Value>| {
            let _n = DisplayNesting::enter(lua)?;
            let mut text = show_text(lua, &args);
            text.push('\n');
            write_output(lua, &text);
            Ok(())
        })?,
    )?;
    // ipairs that walks vectors too (Lua 5.4 has no __ipairs, and a vector
    // index out of range is an error rather than nil).
    g.raw_set(
        "ipairs",
        lua.create_function(|lua, v: Value| {
            if let Value::UserData(ud) = &v {
                if ud.is::<Vector>() {
                    let iter = super::vector::iterator(lua)?;
                    return Ok((Value::Function(iter), v, Value::Integer(0)));
                }
            }
            let raw: Function = lua.named_registry_value(KEY_IPAIRS)?;
            raw.call::<(Value, Value, Value)>(v)
        })?,
    )?;
    Ok(())
}

/// `load` for text chunks only: `load(text [, chunkname [, mode [, env]]])`.
/// Returns the compiled function, or nil and a message like the standard
/// `load`. Reader functions and binary chunks are refused.
fn safe_load(
    lua: &Lua,
    (chunk, name, mode, env): (Value, Option<String>, Option<String>, Option<Table>),
) -> mlua::Result<(Value, Option<String>)> {
    let Value::String(src) = chunk else {
        return Ok((
            Value::Nil,
            Some(format!(
                "load: only a string of Lua source can be loaded, got {}",
                chunk.type_name()
            )),
        ));
    };
    if let Some(m) = &mode {
        if !m.contains('t') {
            return Ok((
                Value::Nil,
                Some("load: binary chunks are not allowed (mode must be \"t\")".into()),
            ));
        }
    }
    let bytes = src.as_bytes().to_vec();
    if bytes.first() == Some(&0x1b) {
        return Ok((
            Value::Nil,
            Some("load: binary chunks are not allowed".into()),
        ));
    }
    let name = match name {
        Some(n) if n.starts_with('=') || n.starts_with('@') => n,
        Some(n) => format!("={n}"),
        None => "=(load)".to_string(),
    };
    let mut chunk = lua.load(bytes).set_name(name).set_mode(ChunkMode::Text);
    if let Some(env) = env {
        chunk = chunk.set_environment(env);
    }
    match chunk.into_function() {
        Ok(f) => Ok((Value::Function(f), None)),
        Err(e) => Ok((Value::Nil, Some(describe(&e).message))),
    }
}
