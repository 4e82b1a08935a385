//! The Lua script host: one sandboxed Lua 5.4 state with the meniscus API
//! registered in it. Front ends (the command line, the REPL) talk to Lua only
//! through [`Host`].

use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;
use std::sync::Arc;
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
    interrupt: Arc<AtomicBool>,
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
        Ok(Host {
            lua,
            options,
            interrupt: Arc::new(AtomicBool::new(false)),
        })
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

    /// A flag that, once set (e.g. by a Ctrl-C handler), stops the running
    /// evaluation with an "interrupted" error; the host clears it before
    /// each evaluation.
    pub fn interrupt_handle(&self) -> Arc<AtomicBool> {
        self.interrupt.clone()
    }

    /// Runs a script file; `args` become the global table `arg`
    /// (`arg[0]` the script path, `arg[1..]` the arguments).
    pub fn run_file(&self, path: &Path, args: &[String]) -> Result<(), HostError> {
        let source = std::fs::read_to_string(path).map_err(|e| HostError {
            message: format!("cannot read script {}: {e}", path.display()),
            traceback: None,
        })?;
        let arg = self.lua.create_table()?;
        arg.set(0, path.display().to_string())?;
        for (i, a) in args.iter().enumerate() {
            arg.set(i + 1, a.as_str())?;
        }
        self.lua.globals().set("arg", arg)?;
        let name = format!("@{}", path.display());
        self.lua
            .load(&source)
            .set_name(name)
            .set_mode(mlua::chunk::ChunkMode::Text)
            .exec()?;
        Ok(())
    }

    /// Completion candidates for the identifier-ish word ending at byte
    /// `pos` of `line`: globals, fields after `name.`, methods after `obj:`.
    /// Returns (start of the word being completed, candidates).
    pub fn completions(&self, line: &str, pos: usize) -> (usize, Vec<String>) {
        let head = &line[..pos.min(line.len())];
        let start = head
            .rfind(|c: char| !(c.is_alphanumeric() || c == '_'))
            .map(|i| i + 1)
            .unwrap_or(0);
        let word = &head[start..];
        let mut out: Vec<String> = self
            .lua
            .globals()
            .pairs::<String, mlua::Value>()
            .filter_map(|p| p.ok().map(|(k, _)| k))
            .filter(|k| k.starts_with(word))
            .collect();
        out.sort();
        (start, out)
    }

    /// Drops all user state: a fresh state with the same options.
    pub fn reset(&mut self) -> Result<(), HostError> {
        let fresh = Host::new(self.options.clone())?;
        self.lua = fresh.lua;
        Ok(())
    }
}
