//! The Lua script host: one sandboxed Lua 5.4 state with the meniscus API
//! registered in it. Front ends (the command line, the REPL) talk to Lua only
//! through [`Host`].
//!
//! Submodules: [`sandbox`] (which parts of Lua scripts get), [`limits`]
//! (time, Ctrl-C, Rust memory), [`errors`] (messages for users),
//! [`convert`] (argument conversion and bulk evaluation), [`vector`],
//! [`mixture`], [`files`], [`help`], [`format`], [`complete`],
//! [`readonly`] (shared tables as read-only views), [`sheet`],
//! [`plugins`]. Each Lua namespace has one `register(lua)`.

#[cfg(feature = "plot")]
pub mod chart;
pub mod complete;
pub mod convert;
pub mod errors;
pub mod files;
pub mod files_csv;
pub mod fit;
pub mod format;
pub mod help;
pub mod limits;
pub mod mixture;
#[cfg(feature = "plot")]
pub mod plot;
pub mod plugins;
pub mod process;
pub mod readonly;
pub mod sandbox;
pub mod sheet;
pub mod units;
pub mod vector;

use std::cell::RefCell;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::rc::Rc;
use std::sync::atomic::AtomicBool;
use std::sync::Arc;
use std::time::Duration;

use mlua::chunk::ChunkMode;
use mlua::{Function, Lua, MultiValue, Value};

pub use convert::{Fields, Numbers};
pub use help::{add_help, HelpEntry};
pub use mixture::{mixture_userdata, MixtureUd};
pub use plugins::{PluginInfo, PluginProblem};
pub use vector::Vector;

use limits::{Budget, RustMemory};
use sandbox::Output;

/// How a host is set up (from the command line or an embedder).
#[derive(Debug, Clone)]
pub struct HostOptions {
    /// Extra plugin directories (`--plugins`), searched after the standard ones.
    pub plugin_dirs: Vec<PathBuf>,
    /// Also search the standard plugin directories: `./plugins` and the
    /// user's `<config dir>/meniscus/plugins` (true by default; embedders and
    /// tests that want only `plugin_dirs` turn it off).
    pub standard_plugin_dirs: bool,
    /// Directories besides the working directory that scripts may read and
    /// write through meniscus functions (`--allow-path`).
    pub allow_paths: Vec<PathBuf>,
    /// Memory limit in bytes: Lua's own allocations plus the vectors Rust
    /// holds for scripts.
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
            standard_plugin_dirs: true,
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
    /// Traceback, when `--trace` was asked for (and Lua had one).
    pub traceback: Option<String>,
}

impl HostError {
    fn plain(message: impl Into<String>) -> Self {
        HostError {
            message: message.into(),
            traceback: None,
        }
    }
}

impl From<mlua::Error> for HostError {
    fn from(e: mlua::Error) -> Self {
        let d = errors::describe(&e);
        HostError {
            message: d.message,
            traceback: d.traceback,
        }
    }
}

/// Whether a piece of REPL input is a complete chunk.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Completeness {
    /// It parses (or has an error more input would not fix).
    Complete,
    /// It would parse given more lines (an open block, string, bracket).
    Incomplete,
}

/// A sandboxed Lua state with the meniscus API.
pub struct Host {
    lua: Lua,
    options: HostOptions,
    interrupt: Arc<AtomicBool>,
    budget: Rc<Budget>,
    plugins: Vec<PluginInfo>,
    plugin_problems: Vec<PluginProblem>,
}

/// Time a plugin file may take to load when the host has no time limit.
const PLUGIN_LOAD_TIMEOUT: Duration = Duration::from_secs(10);

/// Lua memory limits below this leave no room for the API itself.
const MIN_MEMORY: usize = 4 * 1024 * 1024;

fn build(
    options: &HostOptions,
    interrupt: Arc<AtomicBool>,
) -> Result<(Lua, Rc<Budget>), HostError> {
    if options.memory_limit < MIN_MEMORY {
        return Err(HostError::plain(format!(
            "memory limit of {} bytes is too small; give at least {} MiB",
            options.memory_limit,
            MIN_MEMORY / (1024 * 1024)
        )));
    }
    let lua = sandbox::new_state()?;
    let budget = Rc::new(Budget::new(interrupt));
    lua.set_app_data(budget.clone());
    lua.set_app_data(Rc::new(RustMemory::new(options.memory_limit)));
    let roots = files::FileRoots::new(&options.allow_paths, options.memory_limit as u64)
        .map_err(HostError::plain)?;
    lua.set_app_data(roots);

    sandbox::setup(&lua, budget.clone())?;
    help::register(&lua)?;
    vector::register(&lua)?;
    mixture::register(&lua)?;
    files::register(&lua)?;
    files_csv::register(&lua)?;
    process::register(&lua)?;
    units::register(&lua)?;
    fit::register(&lua)?;
    #[cfg(feature = "plot")]
    plot::register(&lua)?;
    #[cfg(feature = "plot")]
    chart::register(&lua)?;
    readonly::register(&lua)?;
    sheet::register(&lua)?;
    plugins::register(&lua)?;
    limits::install_hook(&lua, budget.clone())?;
    lua.set_memory_limit(options.memory_limit + headroom(options.memory_limit))?;
    Ok((lua, budget))
}

/// Memory the host may use beyond the scripts' limit for its own work
/// (compiling the next command, displaying results), so that a script that
/// filled memory and still holds it does not lock the user out: `t = nil`
/// can still be compiled and run.
fn headroom(limit: usize) -> usize {
    (limit / 8).clamp(1024 * 1024, 16 * 1024 * 1024)
}

/// `=name` unless the caller already chose `@file` or `=name`.
fn chunk_name(name: &str) -> String {
    if name.starts_with('@') || name.starts_with('=') {
        name.to_string()
    } else {
        format!("={name}")
    }
}

fn panic_message(p: &(dyn std::any::Any + Send)) -> String {
    if let Some(s) = p.downcast_ref::<&str>() {
        s.to_string()
    } else if let Some(s) = p.downcast_ref::<String>() {
        s.clone()
    } else {
        "unknown panic".to_string()
    }
}

impl Host {
    /// A fresh host: safe libraries only, the meniscus API registered.
    pub fn new(options: HostOptions) -> Result<Host, HostError> {
        let interrupt = Arc::new(AtomicBool::new(false));
        let (lua, budget) = build(&options, interrupt.clone())?;
        let mut host = Host {
            lua,
            options,
            interrupt,
            budget,
            plugins: Vec::new(),
            plugin_problems: Vec::new(),
        };
        host.load_plugins();
        Ok(host)
    }

    /// Loads the plugins from [`Host::plugin_dirs`], reporting each one
    /// skipped on stderr (and in [`Host::plugin_problems`]).
    fn load_plugins(&mut self) {
        let reserved = plugins::reserved_names(&self.lua);
        let mut loaded: Vec<PluginInfo> = Vec::new();
        let mut problems = Vec::new();
        let timeout = self.options.timeout.or(Some(PLUGIN_LOAD_TIMEOUT));
        for dir in self.plugin_dirs() {
            let explicit = self.options.plugin_dirs.contains(&dir);
            let files = match plugins::plugin_files(&dir) {
                Ok(f) => f,
                // A standard directory that does not exist is normal.
                Err(e) if !explicit && e.kind() == std::io::ErrorKind::NotFound => continue,
                Err(e) => {
                    problems.push(PluginProblem {
                        path: dir.clone(),
                        message: format!("cannot read the plugin directory: {e}"),
                    });
                    continue;
                }
            };
            for file in files {
                let r = self.guarded_with(timeout, || {
                    self.limited(|| plugins::load_plugin(&self.lua, &file, &reserved, &loaded))
                });
                match r {
                    Ok(info) => loaded.push(info),
                    Err(e) => problems.push(PluginProblem {
                        path: file,
                        message: e.message,
                    }),
                }
            }
        }
        for p in &problems {
            eprintln!("meniscus: {p}");
        }
        plugins::set_loaded(&self.lua, loaded.clone());
        self.plugins = loaded;
        self.plugin_problems = problems;
    }

    /// The plugin directories searched, in order: `./plugins` and the
    /// user's plugin directory (unless turned off), then `--plugins` ones.
    pub fn plugin_dirs(&self) -> Vec<PathBuf> {
        plugins::search_dirs(self.options.standard_plugin_dirs, &self.options.plugin_dirs)
    }

    /// The plugins loaded, in load order.
    pub fn plugins(&self) -> Vec<PluginInfo> {
        self.plugins.clone()
    }

    /// The plugin files skipped at the last (re)start, with the reasons.
    pub fn plugin_problems(&self) -> Vec<PluginProblem> {
        self.plugin_problems.clone()
    }

    /// The options this host was made with.
    pub fn options(&self) -> &HostOptions {
        &self.options
    }

    /// The Lua state (for registering more API and for tests).
    pub fn lua(&self) -> &Lua {
        &self.lua
    }

    /// Runs `f` as one evaluation: time budget and interrupt armed, Rust
    /// panics caught and reported as bugs, errors described for the user,
    /// and a stopped evaluation reported even if the script swallowed it.
    fn guarded<R>(&self, f: impl FnOnce() -> mlua::Result<R>) -> Result<R, HostError> {
        self.guarded_with(self.options.timeout, f)
    }

    /// [`Host::guarded`] with another time budget.
    fn guarded_with<R>(
        &self,
        timeout: Option<Duration>,
        f: impl FnOnce() -> mlua::Result<R>,
    ) -> Result<R, HostError> {
        self.budget.begin(timeout);
        let result = catch_unwind(AssertUnwindSafe(f));
        let stopped = self.budget.end();
        match result {
            Err(panic) => Err(HostError {
                message: format!(
                    "internal error (a bug in meniscus, please report it with the script that caused it): {}",
                    panic_message(&*panic)
                ),
                traceback: None,
            }),
            Ok(Err(e)) => {
                let mut err = HostError::from(e);
                if let Some(stop) = stopped {
                    err.message = stop;
                } else if err.message == "not enough memory" {
                    err.message = format!(
                        "not enough memory (the memory limit is {} MiB)",
                        format::fmt_number(self.options.memory_limit as f64 / 1048576.0)
                    );
                }
                if !self.options.trace {
                    err.traceback = None;
                }
                Err(err)
            }
            Ok(Ok(_)) if stopped.is_some() => {
                Err(HostError::plain(stopped.unwrap_or_default()))
            }
            Ok(Ok(v)) => Ok(v),
        }
    }

    /// Calls a compiled chunk with the scripts' memory limit in force.
    fn call_limited<R: mlua::FromLuaMulti>(&self, f: &Function) -> mlua::Result<R> {
        self.limited(|| f.call::<R>(()))
    }

    /// Runs `f` with the scripts' memory limit in force.
    fn limited<R>(&self, f: impl FnOnce() -> mlua::Result<R>) -> mlua::Result<R> {
        let limit = self.options.memory_limit;
        self.lua.set_memory_limit(limit)?;
        let r = f();
        self.lua.set_memory_limit(limit + headroom(limit))?;
        r
    }

    fn compile(&self, source: &str, name: &str) -> mlua::Result<Function> {
        self.lua
            .load(source)
            .set_name(name)
            .set_mode(ChunkMode::Text)
            .into_function()
    }

    /// Runs a chunk named `name` (e.g. `"@scripts/x.lua"` or `"=stdin"`);
    /// a bare expression is evaluated as `return <expr>`.
    pub fn eval(&self, source: &str, name: &str) -> Result<MultiValue, HostError> {
        let name = chunk_name(name);
        self.guarded(|| {
            let f = match self.compile(&format!("return {source}"), &name) {
                Ok(f) => f,
                Err(_) => self.compile(source, &name)?,
            };
            self.call_limited::<MultiValue>(&f)
        })
    }

    /// Whether `source` parses, or would parse given more lines.
    pub fn completeness(&self, source: &str) -> Completeness {
        if self.compile(&format!("return {source}"), "=stdin").is_ok() {
            return Completeness::Complete;
        }
        match self.compile(source, "=stdin") {
            Err(mlua::Error::SyntaxError {
                incomplete_input: true,
                ..
            }) => Completeness::Incomplete,
            _ => Completeness::Complete,
        }
    }

    /// Values formatted for display, one per line (numbers to 6 significant
    /// digits, tables aligned, vectors abbreviated).
    pub fn format_values(&self, values: &MultiValue) -> String {
        let vals: Vec<Value> = values.iter().cloned().collect();
        // A value's __tostring is script code: run it under the same budget.
        match self.guarded(|| Ok(sandbox::show_text(&self.lua, &vals))) {
            Ok(s) => s,
            Err(e) => format!("<cannot display: {}>", e.message),
        }
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
        let source = std::fs::read_to_string(path)
            .map_err(|e| HostError::plain(format!("cannot read script {}: {e}", path.display())))?;
        // Like the standalone interpreter, ignore a first line starting
        // with '#' (a shebang), keeping the line numbers.
        let source = if source.starts_with('#') {
            match source.find('\n') {
                Some(i) => format!("--{}", &source[i..]),
                None => String::new(),
            }
        } else {
            source
        };
        let name = format!("@{}", path.display());
        self.guarded(|| {
            let arg = self.lua.create_table()?;
            arg.raw_set(0, path.display().to_string())?;
            for (i, a) in args.iter().enumerate() {
                arg.raw_set(i + 1, a.as_str())?;
            }
            self.lua.globals().raw_set("arg", arg)?;
            let f = self.compile(&source, &name)?;
            self.call_limited::<()>(&f)
        })
    }

    /// Completion candidates for the identifier-ish word ending at byte
    /// `pos` of `line`: globals, fields after `name.`, methods after `obj:`,
    /// keys inside a method's keyword table, help topics after `help "`.
    /// Returns (start of the word being completed, candidates).
    pub fn completions(&self, line: &str, pos: usize) -> (usize, Vec<String>) {
        complete::completions(&self.lua, line, pos)
    }

    /// Drops all user state: a fresh state with the same options (and the
    /// same interrupt flag). Finalizers of the old state run with no
    /// evaluation going on, so one that loops is stopped.
    pub fn reset(&mut self) -> Result<(), HostError> {
        let (lua, budget) = build(&self.options, self.interrupt.clone())?;
        self.lua = lua;
        self.budget = budget;
        self.load_plugins();
        Ok(())
    }

    /// Runs Rust code that calls into Lua (functions of the state, values'
    /// metamethods) as one evaluation: the same time limit, interrupt,
    /// memory limit for scripts, panic catching and error description as
    /// [`Host::eval`]. Outside this and `eval`/`run_file`, Lua code is
    /// stopped at the count hook's first check.
    pub fn run<R>(&self, f: impl FnOnce(&Lua) -> mlua::Result<R>) -> Result<R, HostError> {
        self.guarded(|| {
            let limit = self.options.memory_limit;
            self.lua.set_memory_limit(limit)?;
            let r = f(&self.lua);
            self.lua.set_memory_limit(limit + headroom(limit))?;
            r
        })
    }

    /// The help text for a name (as `help "name"` shows it).
    pub fn help_text(&self, name: &str) -> String {
        help::help_text(&self.lua, name)
    }

    /// All help entries (for front ends that list or complete them).
    pub fn help_entries(&self) -> Vec<HelpEntry> {
        help::entries(&self.lua)
    }

    /// Sends `print`, `show` and `help` output to an in-memory buffer
    /// (`true`) or back to standard output (`false`).
    pub fn capture_output(&self, capture: bool) {
        if let Some(out) = self.lua.app_data_ref::<RefCell<Output>>() {
            *out.borrow_mut() = if capture {
                Output::Capture(String::new())
            } else {
                Output::Stdout
            };
        }
    }

    /// The output captured since the last call (empty when not capturing).
    pub fn take_output(&self) -> String {
        match self.lua.app_data_ref::<RefCell<Output>>() {
            Some(out) => match &mut *out.borrow_mut() {
                Output::Capture(s) => std::mem::take(s),
                Output::Stdout => String::new(),
            },
            None => String::new(),
        }
    }

    /// Bytes of memory in use: Lua's plus the vectors Rust holds.
    pub fn used_memory(&self) -> usize {
        let rust = self
            .lua
            .app_data_ref::<Rc<RustMemory>>()
            .map(|m| m.live())
            .unwrap_or(0);
        self.lua.used_memory() + rust
    }
}
