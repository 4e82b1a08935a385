//! Limits on what one evaluation may consume: a wall-clock budget and the
//! Ctrl-C flag, both checked by a count hook that reaches every coroutine,
//! and the accounting of memory Rust allocates on a script's behalf (which
//! Lua's own memory limit cannot see).
//!
//! Once an evaluation has been stopped it stays stopped until the next one
//! begins: the hook raises the same error every time it fires, and the
//! `pcall`/`xpcall`/`coroutine.resume` wrappers of the sandbox re-raise it
//! instead of returning it, so a script cannot swallow its own kill.

use std::cell::{Cell, RefCell};
use std::rc::Rc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use mlua::{HookTriggers, Lua, VmState};

/// The count hook fires every this many VM instructions. At ~5 ns per
/// instruction that is every ~50 µs, so Ctrl-C and time limits act within
/// well under a millisecond; the check itself (an atomic load and, with a
/// timeout, a clock read) is then negligible. See NOTES-host.md for the
/// measured cost of having a count hook at all.
pub const HOOK_EVERY: u32 = 10_000;

/// Largest vector meniscus builds for a script (elements), whatever the
/// memory limit: 10⁸ values are 800 MB.
pub const MAX_VECTOR_LEN: usize = 100_000_000;

/// Why an evaluation was stopped.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Stop {
    /// The wall-clock budget ran out.
    Timeout(Duration),
    /// The interrupt flag (Ctrl-C) was raised.
    Interrupted,
    /// Lua code ran with no evaluation going on (a `__gc` finalizer run by
    /// the host's own work or when the state is closed).
    Idle,
}

impl std::fmt::Display for Stop {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Stop::Timeout(d) => write!(f, "time limit of {} exceeded", fmt_duration(*d)),
            Stop::Interrupted => write!(f, "interrupted"),
            Stop::Idle => write!(f, "Lua code outside an evaluation stopped"),
        }
    }
}

fn fmt_duration(d: Duration) -> String {
    let s = d.as_secs_f64();
    if s >= 1.0 {
        format!("{} s", super::format::fmt_number(s))
    } else {
        format!("{} ms", super::format::fmt_number(s * 1000.0))
    }
}

/// The per-evaluation budget, shared by the hook, the sandbox wrappers and
/// the host.
#[derive(Debug)]
pub struct Budget {
    deadline: Cell<Option<Instant>>,
    timeout: Cell<Option<Duration>>,
    /// Set on the first stop: the reason and the full message (with the
    /// location where the hook caught the script).
    stopped: RefCell<Option<(Stop, String)>>,
    interrupt: Arc<AtomicBool>,
    /// Nesting depth of `begin`/`end` (a host call made while another is
    /// running must not clear the outer one's state).
    depth: Cell<u32>,
}

impl Budget {
    /// A budget watching `interrupt`, with no evaluation running: until
    /// one begins, any Lua code is stopped at the hook's first check (so
    /// a finalizer that loops cannot hang the host, e.g. when it closes
    /// the state).
    pub fn new(interrupt: Arc<AtomicBool>) -> Self {
        Budget {
            deadline: Cell::new(None),
            timeout: Cell::new(None),
            stopped: RefCell::new(Some(Self::idle())),
            interrupt,
            depth: Cell::new(0),
        }
    }

    fn idle() -> (Stop, String) {
        (Stop::Idle, Stop::Idle.to_string())
    }

    /// Starts an evaluation: clears the interrupt flag and any earlier stop,
    /// and arms the deadline.
    pub fn begin(&self, timeout: Option<Duration>) {
        let d = self.depth.get();
        self.depth.set(d + 1);
        if d > 0 {
            return;
        }
        self.interrupt.store(false, Ordering::SeqCst);
        *self.stopped.borrow_mut() = None;
        self.timeout.set(timeout);
        self.deadline.set(timeout.map(|t| Instant::now() + t));
    }

    /// Ends an evaluation, returning the stop message if it was stopped.
    pub fn end(&self) -> Option<String> {
        let d = self.depth.get().saturating_sub(1);
        self.depth.set(d);
        if d > 0 {
            return self.stopped.borrow().as_ref().map(|(_, m)| m.clone());
        }
        self.deadline.set(None);
        let stop = self.stopped.borrow_mut().replace(Self::idle());
        stop.map(|(_, m)| m)
    }

    /// The stop message, if the running evaluation has been stopped.
    pub fn stopped(&self) -> Option<String> {
        self.stopped.borrow().as_ref().map(|(_, m)| m.clone())
    }

    /// Checks the flag and the clock; on the first failure records the stop
    /// with `location` (a `file:line` or empty).
    fn check(&self, location: impl FnOnce() -> String) -> Option<String> {
        if let Some((_, m)) = self.stopped.borrow().as_ref() {
            return Some(m.clone());
        }
        let stop = if self.interrupt.load(Ordering::Relaxed) {
            Some(Stop::Interrupted)
        } else {
            match self.deadline.get() {
                Some(d) if Instant::now() >= d => {
                    Some(Stop::Timeout(self.timeout.get().unwrap_or_default()))
                }
                _ => None,
            }
        };
        stop.map(|s| {
            let loc = location();
            let msg = if loc.is_empty() {
                s.to_string()
            } else {
                format!("{loc}: {s}")
            };
            *self.stopped.borrow_mut() = Some((s, msg.clone()));
            msg
        })
    }
}

/// Installs the count hook on the state. `set_global_hook` (not the
/// per-thread `set_hook`) so that coroutines, which copy the hook of the
/// thread that creates them, are covered too.
pub fn install_hook(lua: &Lua, budget: Rc<Budget>) -> mlua::Result<()> {
    lua.set_global_hook(
        HookTriggers::new().every_nth_instruction(HOOK_EVERY),
        move |_lua, debug| {
            let stopped = budget.check(|| {
                let src = debug.source();
                let file = src.short_src.as_deref().unwrap_or("?").to_string();
                match debug.current_line() {
                    Some(line) => format!("{file}:{line}"),
                    None => file,
                }
            });
            match stopped {
                Some(msg) => Err(mlua::Error::RuntimeError(msg)),
                None => Ok(VmState::Continue),
            }
        },
    )
}

/// Memory that Rust holds for scripts (vectors), counted against the same
/// limit as Lua's own allocations.
#[derive(Debug)]
pub struct RustMemory {
    live: Cell<usize>,
    limit: Cell<usize>,
}

impl RustMemory {
    /// Nothing allocated yet; `limit` is the host's memory limit in bytes.
    pub fn new(limit: usize) -> Self {
        RustMemory {
            live: Cell::new(0),
            limit: Cell::new(limit),
        }
    }

    /// Bytes currently held.
    pub fn live(&self) -> usize {
        self.live.get()
    }
}

fn rust_memory(lua: &Lua) -> Option<Rc<RustMemory>> {
    lua.app_data_ref::<Rc<RustMemory>>().map(|r| r.clone())
}

fn mib(bytes: usize) -> String {
    super::format::fmt_number(bytes as f64 / (1024.0 * 1024.0))
}

/// Checks that `elements` f64 values may be allocated for a script, before
/// allocating them: at most [`MAX_VECTOR_LEN`], and Lua memory plus live
/// Rust vectors plus the new block within the memory limit (after a full
/// garbage collection, which may free vectors nobody holds any more).
pub fn check_alloc(lua: &Lua, what: &str, elements: usize) -> mlua::Result<()> {
    if elements > MAX_VECTOR_LEN {
        return Err(mlua::Error::RuntimeError(format!(
            "{what}: {elements} values is more than the {MAX_VECTOR_LEN} a vector may hold"
        )));
    }
    let bytes = elements.saturating_mul(std::mem::size_of::<f64>());
    check_bytes(lua, bytes).map_err(|figures| {
        mlua::Error::RuntimeError(format!(
            "{what}: not enough memory for {elements} values ({} MiB; {figures})",
            mib(bytes)
        ))
    })
}

/// Checks that `bytes` more of Rust memory may be held for a script (a
/// sheet, say), as [`check_alloc`] does for vectors. `Err` carries the
/// figures for the caller's message: `memory limit X MiB, Y MiB in use`.
pub fn check_bytes(lua: &Lua, bytes: usize) -> Result<(), String> {
    let Some(mem) = rust_memory(lua) else {
        return Ok(());
    };
    let fits = |lua: &Lua| {
        lua.used_memory()
            .saturating_add(mem.live())
            .saturating_add(bytes)
            <= mem.limit.get()
    };
    if fits(lua) {
        return Ok(());
    }
    // Vectors are freed only when Lua collects their userdata, and Lua does
    // not know how big they are: collect now before refusing.
    let _ = lua.gc_collect();
    let _ = lua.gc_collect();
    if fits(lua) {
        return Ok(());
    }
    Err(format!(
        "memory limit {} MiB, {} MiB in use",
        mib(mem.limit.get()),
        mib(lua.used_memory() + mem.live())
    ))
}

/// Megabytes of `bytes`, formatted for messages.
pub fn fmt_mib(bytes: usize) -> String {
    mib(bytes)
}

/// A block of Rust memory held for a script; released when dropped.
#[derive(Debug)]
pub struct Allocation {
    bytes: usize,
    mem: Option<Rc<RustMemory>>,
}

impl Allocation {
    /// Records `elements` f64 values as held (call [`check_alloc`] first).
    pub fn new(lua: &Lua, elements: usize) -> Allocation {
        Allocation::of_bytes(lua, elements * std::mem::size_of::<f64>())
    }

    /// Records `bytes` of Rust memory as held (call [`check_bytes`] first).
    pub fn of_bytes(lua: &Lua, bytes: usize) -> Allocation {
        let mem = rust_memory(lua);
        if let Some(m) = &mem {
            m.live.set(m.live.get() + bytes);
        }
        Allocation { bytes, mem }
    }
}

impl Drop for Allocation {
    fn drop(&mut self) {
        if let Some(m) = &self.mem {
            m.live.set(m.live.get().saturating_sub(self.bytes));
        }
    }
}
