//! Helpers shared by the integration tests: making a Lua host, evaluating a
//! chunk and taking a number, string or table from it, checking an error
//! message, scratch directories, and running the `meniscus` binary.
//!
//! Each test file is its own crate and uses only some of these, hence the
//! `dead_code` allowance.
#![allow(dead_code)]

pub mod noise;

#[cfg(feature = "lua")]
use std::path::{Path, PathBuf};
#[cfg(feature = "cli")]
use std::process::{Command, Output, Stdio};

#[cfg(feature = "lua")]
use meniscus::lua::{Host, HostError, HostOptions};
#[cfg(feature = "lua")]
use mlua::{MultiValue, Table, Value};

/// Whether `a` and `b` agree to `rel` relative to the larger of them (and
/// absolutely near zero).
pub fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs()).max(1.0)
}

// ---- the Lua host --------------------------------------------------------

/// A host with `options` whose printed output is captured rather than
/// written to the test's stdout.
#[cfg(feature = "lua")]
pub fn quiet_host(options: HostOptions) -> Host {
    let h = Host::new(options).expect("host");
    h.capture_output(true);
    h
}

/// A quiet host with the global `m` set to the ethanol–water mixture.
#[cfg(feature = "lua")]
pub fn ethanol_water_host(options: HostOptions) -> Host {
    let h = quiet_host(options);
    h.eval("m = mixture.ethanol_water()", "=setup")
        .expect("setup");
    h
}

/// What `src` returns; a failure panics with the message.
#[cfg(feature = "lua")]
pub fn eval(h: &Host, src: &str) -> MultiValue {
    match h.eval(src, "=test") {
        Ok(v) => v,
        Err(e) => panic!("eval of {src:?} failed: {}", e.message),
    }
}

/// The first value `src` returns, as a number.
#[cfg(feature = "lua")]
pub fn num(h: &Host, src: &str) -> f64 {
    match eval(h, src).iter().next() {
        Some(Value::Number(x)) => *x,
        Some(Value::Integer(i)) => *i as f64,
        other => panic!("{src}: expected a number, got {other:?}"),
    }
}

/// Every value `src` returns, each a number.
#[cfg(feature = "lua")]
pub fn nums(h: &Host, src: &str) -> Vec<f64> {
    eval(h, src)
        .iter()
        .map(|v| match v {
            Value::Number(x) => *x,
            Value::Integer(i) => *i as f64,
            other => panic!("{src}: expected numbers, got {other:?}"),
        })
        .collect()
}

/// The first value `src` returns, as a string.
#[cfg(feature = "lua")]
pub fn text(h: &Host, src: &str) -> String {
    match eval(h, src).iter().next() {
        Some(Value::String(s)) => s.to_string_lossy(),
        other => panic!("{src}: expected a string, got {other:?}"),
    }
}

/// The first value `src` returns, as a table.
#[cfg(feature = "lua")]
pub fn table(h: &Host, src: &str) -> Table {
    match eval(h, src).iter().next() {
        Some(Value::Table(t)) => t.clone(),
        other => panic!("{src}: expected a table, got {other:?}"),
    }
}

/// Field `k` of `t`, as a number.
#[cfg(feature = "lua")]
pub fn field(t: &Table, k: &str) -> f64 {
    match t.get::<Value>(k).unwrap() {
        Value::Number(x) => x,
        Value::Integer(i) => i as f64,
        other => panic!("field {k}: expected a number, got {other:?}"),
    }
}

/// The error `src` fails with; success panics.
#[cfg(feature = "lua")]
pub fn err(h: &Host, src: &str) -> HostError {
    match h.eval(src, "=test") {
        Ok(v) => panic!("{src:?} should fail, gave {}", h.format_values(&v)),
        Err(e) => e,
    }
}

/// Asserts that `src` fails with a one-line message containing every
/// fragment.
#[cfg(feature = "lua")]
pub fn fails_with(h: &Host, src: &str, fragments: &[&str]) {
    let e = err(h, src);
    for f in fragments {
        assert!(
            e.message.contains(f),
            "{src:?}: message {:?} lacks {f:?}",
            e.message
        );
    }
    assert!(!e.message.contains('\n'), "one line: {:?}", e.message);
}

/// An empty directory `group/name` under the crate's target directory,
/// hence inside the working directory the tests run in, so scripts may use
/// it.
#[cfg(feature = "lua")]
pub fn scratch_dir(group: &str, name: &str) -> PathBuf {
    let d = Path::new(env!("CARGO_TARGET_TMPDIR"))
        .join(group)
        .join(name);
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// `p` as a quoted Lua string literal.
#[cfg(feature = "lua")]
pub fn lua_str(p: &Path) -> String {
    format!("{:?}", p.display().to_string())
}

// ---- the binary ----------------------------------------------------------

/// The `meniscus` binary built for these tests.
#[cfg(feature = "cli")]
pub const BIN: &str = env!("CARGO_BIN_EXE_meniscus");

/// The binary with a hermetic environment: no history file, no stdin.
#[cfg(feature = "cli")]
pub fn meniscus() -> Command {
    let mut c = Command::new(BIN);
    c.env("MENISCUS_HISTORY", "").stdin(Stdio::null());
    c
}

/// What the process wrote on stdout, as text.
#[cfg(feature = "cli")]
pub fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// What the process wrote on stderr, as text.
#[cfg(feature = "cli")]
pub fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// How the host shows what `chunk` returns, followed by a newline.
#[cfg(feature = "cli")]
pub fn shown(chunk: &str) -> String {
    let host = Host::new(HostOptions::default()).unwrap();
    format!(
        "{}\n",
        host.format_values(&host.eval(chunk, "=expected").unwrap())
    )
}
