//! The `meniscus` binary from the outside: `eval`, `run`, options before
//! and after the command, exit statuses, error locations, tracebacks, the
//! sandbox and the resource limits as a user meets them.
//!
//! Expected values are formatted by the library's own host, so these tests
//! check the command line, not a display format.
#![cfg(feature = "cli")]

use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::{Output, Stdio};
use std::time::{Duration, Instant};

mod common;
use common::{meniscus, shown, stderr, stdout};

fn run(args: &[&str]) -> Output {
    meniscus().args(args).output().expect("start meniscus")
}

/// Runs the binary, killing it if it has not finished within `limit`
/// (a test of a limit must not hang the suite when the limit is missing).
fn run_with_deadline(args: &[&str], limit: Duration) -> (Option<i32>, String, Duration) {
    let start = Instant::now();
    let mut child = meniscus()
        .args(args)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("start meniscus");
    loop {
        if let Some(status) = child.try_wait().unwrap() {
            let mut err = String::new();
            child
                .stderr
                .take()
                .unwrap()
                .read_to_string(&mut err)
                .unwrap();
            return (status.code(), err, start.elapsed());
        }
        if start.elapsed() > limit {
            child.kill().unwrap();
            child.wait().unwrap();
            panic!("meniscus {args:?} still running after {limit:?}");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
}

fn script(dir: &Path, name: &str, body: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, body).unwrap();
    p
}

#[test]
fn eval_prints_the_value_of_a_bare_expression() {
    let o = run(&["eval", "6 * 7"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(stdout(&o), shown("6 * 7"));
    assert_eq!(stderr(&o), "");
}

#[test]
fn eval_of_statements_prints_only_what_they_return() {
    let o = run(&["eval", "local x = 2"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(stdout(&o), "");

    let o = run(&["eval", "local x = 3; return x * x, 'done'"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(stdout(&o), shown("9, 'done'"));
}

#[test]
fn run_passes_arguments_as_arg() {
    let dir = tempfile::tempdir().unwrap();
    let s = script(
        dir.path(),
        "args.lua",
        "print(#arg, arg[1], arg[2], arg[3])\nprint(arg[0])\n",
    );
    // Everything after the script name is the script's, dashes included.
    let o = run(&["run", s.to_str().unwrap(), "tank 7", "--trace", "-5"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(
        stdout(&o),
        format!("3\ttank 7\t--trace\t-5\n{}\n", s.display())
    );
}

#[test]
fn script_error_cites_file_and_line_on_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let s = script(
        dir.path(),
        "broken.lua",
        "local a = 1\nlocal b = 2\nlocal c = a + nil_value.field\nprint('not reached')\n",
    );
    let o = run(&["run", s.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1));
    assert_eq!(stdout(&o), "", "the script stopped at line 3");
    let err = stderr(&o);
    assert_eq!(err.lines().count(), 1, "one line without --trace: {err}");
    assert!(err.starts_with("error: "), "{err}");
    assert!(err.contains("broken.lua:3:"), "{err}");
}

#[test]
fn syntax_error_cites_file_and_line() {
    let dir = tempfile::tempdir().unwrap();
    let s = script(dir.path(), "syntax.lua", "local x = 1\n\nlocal y = = 2\n");
    let o = run(&["run", s.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(1));
    let err = stderr(&o);
    assert!(err.contains("syntax.lua:3:"), "{err}");
    assert_eq!(err.lines().count(), 1, "{err}");

    let o = run(&["eval", "x = = 1"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(stderr(&o).contains("eval:1:"), "{}", stderr(&o));
}

#[test]
fn trace_adds_a_traceback_before_or_after_the_command() {
    let dir = tempfile::tempdir().unwrap();
    let s = script(
        dir.path(),
        "deep.lua",
        "local function inner()\n  error('bad reading')\nend\nlocal function outer()\n  inner()\nend\nouter()\n",
    );
    let path = s.to_str().unwrap();
    for args in [vec!["--trace", "run", path], vec!["run", "--trace", path]] {
        let o = run(&args);
        assert_eq!(o.status.code(), Some(1));
        let err = stderr(&o);
        assert!(err.starts_with("error: "), "{err}");
        assert!(err.contains("deep.lua:2:"), "{err}");
        assert!(err.to_lowercase().contains("traceback"), "{args:?}: {err}");
        assert!(err.lines().count() > 2, "{err}");
    }
    for args in [
        vec!["--trace", "eval", "error('x')"],
        vec!["eval", "error('x')", "--trace"],
    ] {
        let err = stderr(&run(&args));
        assert!(err.to_lowercase().contains("traceback"), "{args:?}: {err}");
    }
}

#[test]
fn usage_errors_exit_2() {
    for args in [
        vec!["--no-such-option"],
        vec!["frobnicate"],
        vec!["eval"],
        vec!["run"],
        vec!["--memory-limit", "lots", "eval", "1"],
        vec!["eval", "1", "--memory-limit", "0"],
        vec!["--timeout", "-3", "eval", "1"],
        vec!["--timeout", "soon", "eval", "1"],
        vec!["--plugins", "/nonexistent/meniscus-dir", "eval", "1"],
        vec!["--allow-path", "/nonexistent/meniscus-dir", "eval", "1"],
        vec!["run", "/nonexistent/meniscus-script.lua"],
    ] {
        let o = run(&args);
        assert_eq!(o.status.code(), Some(2), "{args:?}: {}", stderr(&o));
        assert!(stderr(&o).starts_with("error:"), "{args:?}: {}", stderr(&o));
        assert_eq!(stdout(&o), "", "{args:?}");
    }
}

#[test]
fn script_errors_exit_1() {
    for chunk in [
        "error('out of range')",
        "nil + 1",
        "local t = nil; return t.x",
    ] {
        let o = run(&["eval", chunk]);
        assert_eq!(o.status.code(), Some(1), "{chunk}");
        let err = stderr(&o);
        assert!(
            err.starts_with("error: ") && err.contains("eval:1:"),
            "{chunk}: {err}"
        );
    }
}

#[test]

fn error_line_is_location_then_message() {
    let dir = tempfile::tempdir().unwrap();
    let s = script(dir.path(), "cut.lua", "\n\nerror('below the cut point')\n");
    let o = run(&["run", s.to_str().unwrap()]);
    assert_eq!(
        stderr(&o),
        format!("error: {}:3: below the cut point\n", s.display())
    );
    let o = run(&["eval", "nil + 1"]);
    assert!(
        stderr(&o).starts_with("error: eval:1: attempt to perform arithmetic"),
        "{}",
        stderr(&o)
    );
}

#[test]
fn help_and_version() {
    let o = run(&["--version"]);
    assert_eq!(o.status.code(), Some(0));
    assert!(stdout(&o).contains(env!("CARGO_PKG_VERSION")));

    let o = run(&["--help"]);
    assert_eq!(o.status.code(), Some(0));
    let text = stdout(&o);
    for needle in [
        "not certified measurements",
        "prescribed",
        "flammable",
        "local regulations",
        "Exit status",
        ":quit",
        "--memory-limit",
        "--timeout",
        "--allow-path",
        "--plugins",
        "--trace",
    ] {
        assert!(text.contains(needle), "--help lacks {needle:?}");
    }
}

#[test]
fn io_os_and_require_are_not_available() {
    for chunk in [
        "os.execute('echo hacked')",
        "io.open('/etc/passwd')",
        "require('os')",
        "dofile('/etc/passwd')",
        "loadfile('/etc/passwd')",
    ] {
        let o = run(&["eval", chunk]);
        assert_eq!(o.status.code(), Some(1), "{chunk}");
        assert!(!stdout(&o).contains("hacked"), "{chunk}");
        assert!(stderr(&o).starts_with("error: "), "{chunk}: {}", stderr(&o));
    }
}

#[test]
fn memory_limit_applies_before_or_after_the_command() {
    // A table of 2e6 numbers, about 32 MiB: fine under the default limit
    // (1 GiB) ...
    let bomb = "local t = {} for i = 1, 2e6 do t[i] = i end return #t";
    let o = run(&["eval", bomb]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    // ... refused under 16 MiB, wherever the option stands.
    for args in [
        vec!["--memory-limit", "16", "eval", bomb],
        vec!["eval", bomb, "--memory-limit", "16"],
    ] {
        let o = run(&args);
        assert_eq!(o.status.code(), Some(1), "{args:?}");
        assert!(stderr(&o).contains("memory"), "{args:?}: {}", stderr(&o));
    }
}

#[test]
fn memory_bomb_by_table_growth_is_stopped() {
    let (code, err, _) = run_with_deadline(
        &[
            "--memory-limit",
            "32",
            "eval",
            "local t = {} for i = 1, 1e9 do t[i] = {i} end",
        ],
        Duration::from_secs(60),
    );
    assert_eq!(code, Some(1), "{err}");
    assert!(err.contains("memory"), "{err}");
}

#[test]

fn timeout_stops_an_infinite_loop() {
    for args in [
        vec!["--timeout", "1", "eval", "while true do end"],
        vec!["eval", "while true do end", "--timeout", "1"],
        // pcall must not swallow the timeout.
        vec![
            "--timeout",
            "1",
            "eval",
            "while true do pcall(function() while true do end end) end",
        ],
    ] {
        let (code, err, took) = run_with_deadline(&args, Duration::from_secs(20));
        assert_eq!(code, Some(1), "{args:?}: {err}");
        assert!(err.starts_with("error: "), "{err}");
        assert!(
            err.to_lowercase().contains("time"),
            "the message should say a time limit was hit: {err}"
        );
        assert!(took < Duration::from_secs(10), "{args:?} took {took:?}");
    }
}

#[test]
fn broken_pipe_on_stdout_is_not_an_error() {
    let mut child = meniscus()
        .args(["eval", "string.rep('0123456789', 100000)"])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    // Close the reading end before the (pipe-buffer-sized) output is read.
    drop(child.stdout.take());
    let o = child.wait_with_output().unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(stderr(&o), "");
}

#[test]
fn debug_loadlib_and_bytecode_are_refused() {
    for (chunk, says) in [
        ("return debug.traceback()", "debug"),
        ("return package.loadlib('libc.so.6', 'system')", "package"),
        ("return string.dump(print)", "dump"),
        // A binary chunk is refused by `load` itself; asserting on the
        // refusal makes the chunk fail the way a script would see it.
        (
            "assert(load('\\27Lua\\84\\0'))",
            "binary chunks are not allowed",
        ),
    ] {
        let o = run(&["eval", chunk]);
        assert_eq!(o.status.code(), Some(1), "{chunk}");
        let err = stderr(&o);
        assert!(err.starts_with("error: eval:1: "), "{chunk}: {err}");
        assert!(err.contains(says), "{chunk}: {err}");
    }
}

#[test]
fn timeout_reaches_coroutines() {
    let (code, err, took) = run_with_deadline(
        &[
            "--timeout",
            "1",
            "eval",
            "local co = coroutine.create(function() while true do end end) \
             return coroutine.resume(co)",
        ],
        Duration::from_secs(20),
    );
    assert_eq!(code, Some(1), "{err}");
    assert!(err.contains("time limit"), "{err}");
    assert!(took < Duration::from_secs(10), "took {took:?}");
}

#[test]
fn deep_recursion_is_a_clear_error() {
    let o = run(&[
        "eval",
        "local function f(n) return f(n + 1) + 1 end return f(1)",
    ]);
    assert_eq!(o.status.code(), Some(1));
    assert!(stderr(&o).contains("stack overflow"), "{}", stderr(&o));
}

#[test]
fn files_outside_allowed_dirs_are_refused_and_nothing_is_written() {
    let dir = tempfile::tempdir().unwrap();
    let outside = tempfile::tempdir().unwrap();
    let target = outside.path().join("table.csv");
    let reader = script(
        dir.path(),
        "read.lua",
        "local s = files.read('/etc/passwd')\n",
    );
    let o = meniscus()
        .current_dir(dir.path())
        .args(["run", reader.to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(1));
    assert!(
        stderr(&o).contains("outside the working directory"),
        "{}",
        stderr(&o)
    );
    let writer = script(
        dir.path(),
        "write.lua",
        &format!(
            "files.write_csv({:?}, {{'abv'}}, {{{{40}}}})\n",
            target.to_str().unwrap()
        ),
    );
    let o = meniscus()
        .current_dir(dir.path())
        .args(["run", writer.to_str().unwrap()])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    assert!(stderr(&o).contains("write.lua:1:"), "{}", stderr(&o));
    assert!(!target.exists(), "a refused write left a file");
    assert_eq!(std::fs::read_dir(outside.path()).unwrap().count(), 0);
    // The same write succeeds once the directory is allowed.
    let o = meniscus()
        .current_dir(dir.path())
        .args([
            "--allow-path",
            outside.path().to_str().unwrap(),
            "run",
            writer.to_str().unwrap(),
        ])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(target.exists());
}
