//! The Lua script host: one sandboxed Lua 5.4 state with the meniscus API
//! registered in it. Front ends (the command line, the REPL) talk to Lua only
//! through [`Host`].

use std::path::PathBuf;
use std::time::Duration;

use mlua::{Lua, LuaOptions, MultiValue, StdLib};

/// How a host is set up (from the command line or an embedder).
#[derive(Debug, Clone)]
pub struct HostOptions {
    /// Extra plugin directories (`--plugins`).
    pub plugin_dirs: Vec<PathBuf>,
    /// Directories besides the working directory that scripts may read and
    /// write through meniscus functions (`--allow-path`).
    pub allow_paths: Vec<PathBuf>,
    /// Lua memory limit in bytes.
    pub memory_limit: usize,
    /// Wall-clock budget per evaluation; `None` for no limit.
    pub timeout: Option<Duration>,
    /// Full tracebacks in error messages.
    pub trace: bool,
}

impl Default for HostOptions {
    fn default() -> Self {
        Self {
            plugin_dirs: Vec::new(),
            allow_paths: Vec::new(),
            memory_limit: 1024 * 1024 * 1024,
            timeout: None,
            trace: false,
        }
    }
}

/// An error from the host, already phrased for the user (`file:line: message`).
#[derive(Debug, thiserror::Error)]
#[error("{message}")]
pub struct HostError {
    /// One line, `file:line: message` where a location is known.
    pub message: String,
    /// Traceback, when `--trace` was asked for.
    pub traceback: Option<String>,
}

impl From<mlua::Error> for HostError {
    fn from(e: mlua::Error) -> Self {
        HostError {
            message: e.to_string().lines().next().unwrap_or("").to_string(),
            traceback: Some(e.to_string()),
        }
    }
}

/// Whether a piece of REPL input is a complete chunk.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Completeness {
    Complete,
    Incomplete,
}

/// A sandboxed Lua state with the meniscus API.
pub struct Host {
    lua: Lua,
    options: HostOptions,
}

impl Host {
    /// A fresh host: safe libraries only, the meniscus API registered.
    pub fn new(options: HostOptions) -> Result<Host, HostError> {
        let libs = StdLib::TABLE | StdLib::STRING | StdLib::MATH | StdLib::UTF8 | StdLib::COROUTINE;
        let lua = Lua::new_with(libs, LuaOptions::new().catch_rust_panics(false))?;
        lua.set_memory_limit(options.memory_limit)?;
        let g = lua.globals();
        for name in ["dofile", "loadfile", "load", "collectgarbage"] {
            g.set(name, mlua::Value::Nil)?;
        }
        Ok(Host { lua, options })
    }

    /// The options this host was made with.
    pub fn options(&self) -> &HostOptions {
        &self.options
    }

    /// The Lua state (for registering more API and for tests).
    pub fn lua(&self) -> &Lua {
        &self.lua
    }

    /// Runs a chunk named `name` (e.g. `"@scripts/x.lua"` or `"=stdin"`);
    /// a bare expression is evaluated as `return <expr>`.
    pub fn eval(&self, source: &str, name: &str) -> Result<MultiValue, HostError> {
        let as_expr = format!("return {source}");
        let chunk = self
            .lua
            .load(&as_expr)
            .set_name(name)
            .set_mode(mlua::chunk::ChunkMode::Text);
        if let Ok(f) = chunk.into_function() {
            return Ok(f.call(())?);
        }
        Ok(self
            .lua
            .load(source)
            .set_name(name)
            .set_mode(mlua::chunk::ChunkMode::Text)
            .eval()?)
    }

    /// Whether `source` parses, or would parse given more lines.
    pub fn completeness(&self, source: &str) -> Completeness {
        match self
            .lua
            .load(source)
            .set_mode(mlua::chunk::ChunkMode::Text)
            .into_function()
        {
            Err(mlua::Error::SyntaxError {
                incomplete_input: true,
                ..
            }) => Completeness::Incomplete,
            _ => Completeness::Complete,
        }
    }

    /// Values formatted for display, one per line.
    pub fn format_values(&self, values: &MultiValue) -> String {
        values
            .iter()
            .map(|v| format!("{v:?}"))
            .collect::<Vec<_>>()
            .join("\n")
    }
}
