//! The REPL through piped stdin: multi-line chunks, errors that do not end
//! the session, meta-commands, and exit statuses, as a user piping a file
//! into `meniscus` meets them.
#![cfg(feature = "cli")]

use std::io::Write;
use std::process::{Output, Stdio};

mod common;
use common::{meniscus, shown, stderr, stdout};

/// Runs `meniscus ARGS` with `input` on stdin (a pipe, so the batch front
/// end), without a history file.
fn session(args: &[&str], input: &str) -> Output {
    let mut child = meniscus()
        .args(args)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("start meniscus");
    let mut stdin = child.stdin.take().unwrap();
    let input = input.to_string();
    // Write on a thread: a large output must not deadlock against our input.
    let writer = std::thread::spawn(move || {
        let _ = stdin.write_all(input.as_bytes());
    });
    let out = child.wait_with_output().unwrap();
    writer.join().unwrap();
    out
}

#[test]
fn results_only_no_prompt_or_banner() {
    let o = session(&[], "1 + 1\n\n   \nlocal y = 5\n'abc'\n");
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(stdout(&o), format!("{}{}", shown("1 + 1"), shown("'abc'")));
    assert_eq!(stderr(&o), "");
}

#[test]
fn empty_input_is_a_quiet_success() {
    let o = session(&[], "");
    assert_eq!(o.status.code(), Some(0));
    assert_eq!((stdout(&o).as_str(), stderr(&o).as_str()), ("", ""));
}

#[test]
fn function_defined_over_several_lines() {
    let input = "\
function dilution_water(v, from, to)
  -- litres of water to bring v litres from one strength to another,
  -- ignoring contraction (a rough first guess)
  return v * (from / to - 1)
end
dilution_water(100, 60, 40)
t = {
  1,
  2,
}
#t
";
    let o = session(&[], input);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(
        stdout(&o),
        format!("{}{}", shown("100 * (60 / 40 - 1)"), shown("2"))
    );
}

#[test]
fn an_error_does_not_end_the_session() {
    let input = "x = 10\nx + nil\n\nfunction f()\n  return undefined_name.field\nend\nf()\nx * 2\n";
    let o = session(&[], input);
    assert_eq!(
        o.status.code(),
        Some(1),
        "any failed chunk makes the status 1"
    );
    assert_eq!(stdout(&o), shown("20"));
    let err = stderr(&o);
    let lines: Vec<&str> = err.lines().collect();
    assert_eq!(lines.len(), 2, "{err}");
    // Line numbers count from the start of the input, not of the chunk.
    assert!(
        lines[0].starts_with("error: ") && lines[0].contains("stdin:2:"),
        "{err}"
    );
    // Line 5 is inside f, defined in an earlier chunk than the call.
    assert!(
        lines[1].starts_with("error: ") && lines[1].contains("stdin:5:"),
        "{err}"
    );
}

#[test]
fn syntax_error_cites_the_input_line_and_the_session_goes_on() {
    let o = session(&[], "1\n2\nlocal = 3\n4\n");
    assert_eq!(o.status.code(), Some(1));
    assert_eq!(
        stdout(&o),
        format!("{}{}{}", shown("1"), shown("2"), shown("4"))
    );
    let err = stderr(&o);
    assert!(
        err.starts_with("error: ") && err.contains("stdin:3:"),
        "{err}"
    );
}

#[test]
fn input_ending_inside_a_chunk_is_an_error() {
    let o = session(&[], "1\nfunction half_done()\n  return 1\n");
    assert_eq!(o.status.code(), Some(1));
    assert_eq!(stdout(&o), shown("1"));
    assert!(stderr(&o).starts_with("error: "), "{}", stderr(&o));
}

#[test]
fn trace_in_the_session() {
    let o = session(&["--trace"], "error('deliberate')\n");
    assert_eq!(o.status.code(), Some(1));
    let err = stderr(&o);
    assert!(err.to_lowercase().contains("traceback"), "{err}");
    let o = session(&[], "error('deliberate')\n");
    assert_eq!(stderr(&o).lines().count(), 1, "{}", stderr(&o));
}

#[test]
fn list_and_reset() {
    let input = "\
function blend_abv(v1, a1, v2, a2) return (v1 * a1 + v2 * a2) / (v1 + v2) end
tank_volume = 1200
:list
:reset
:list
blend_abv
";
    let o = session(&[], input);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let out = stdout(&o);
    let (before, after) = out.split_once("nothing defined").expect(&out);
    assert!(
        before.contains("blend_abv") && before.contains("function"),
        "{out}"
    );
    assert!(
        before.contains("tank_volume") && before.contains("number"),
        "{out}"
    );
    assert!(
        !after.contains("blend_abv") && !after.contains("tank_volume"),
        "{out}"
    );
    // After :reset the function is gone: the bare name evaluates to nil.
    assert!(after.ends_with(&shown("nil")), "{out}");
}

#[test]
fn help_and_list_all() {
    let o = session(&[], ":help\n:list all\n");
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let out = stdout(&o);
    for cmd in [":help", ":list", ":plugins", ":reset", ":quit"] {
        assert!(out.contains(cmd), "guide lacks {cmd}: {out}");
    }
    assert!(out.contains("not certified"), "{out}");
    assert!(
        out.contains("math.sqrt()"),
        ":list all lists library functions: {out}"
    );
}

#[test]
fn help_on_an_unknown_name_is_an_error() {
    let o = session(&[], ":help no_such_name_anywhere\n1\n");
    assert_eq!(o.status.code(), Some(1));
    assert_eq!(stdout(&o), shown("1"));
    assert!(
        stderr(&o).contains("no_such_name_anywhere"),
        "{}",
        stderr(&o)
    );
}

#[test]
fn quit_stops_reading() {
    let o = session(&[], "1\n:quit\n2\n");
    assert_eq!(o.status.code(), Some(0));
    assert_eq!(stdout(&o), shown("1"));
    // A failure before :quit still counts.
    let o = session(&[], "nil + 1\n:q\n");
    assert_eq!(o.status.code(), Some(1));
}

#[test]
fn unknown_or_malformed_meta_commands_are_errors_not_the_end() {
    let o = session(&[], ":launch\n:reset now\n3\n");
    assert_eq!(o.status.code(), Some(1));
    assert_eq!(stdout(&o), shown("3"));
    let err = stderr(&o);
    assert!(err.contains("stdin:1:") && err.contains(":launch"), "{err}");
    assert!(
        err.contains("stdin:2:") && err.contains("no argument"),
        "{err}"
    );
}

#[test]
fn goto_labels_are_lua_not_meta_commands() {
    let input = "do\n  local n = 0\n  ::again::\n  n = n + 1\n  if n < 3 then goto again end\n  print(n)\nend\n";
    let o = session(&[], input);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(stdout(&o), "3\n");
}

#[test]
fn plugins_lists_the_plugin_directories() {
    let o = session(&[], ":plugins\n");
    assert_eq!(o.status.code(), Some(0));
    assert!(stdout(&o).contains("--plugins"), "{}", stdout(&o));

    // An empty directory: what a plugin file must contain is the host's
    // business (the file listing itself is tested in the library).
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("notes.txt"), "not a plugin\n").unwrap();
    let o = session(&["--plugins", dir.path().to_str().unwrap()], ":plugins\n");
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let out = stdout(&o);
    assert!(out.contains(&dir.path().display().to_string()), "{out}");
    assert!(out.contains("no .lua files"), "{out}");
    assert!(!out.contains("notes.txt"), "{out}");
}

#[test]
fn sandbox_errors_in_the_session() {
    let o = session(&[], "os.execute('echo hacked')\nio.write('hacked')\n5\n");
    assert_eq!(o.status.code(), Some(1));
    assert_eq!(stdout(&o), shown("5"));
    assert_eq!(stderr(&o).lines().count(), 2, "{}", stderr(&o));
}

#[test]
fn print_output_and_results_keep_their_order() {
    let o = session(&[], "print('first')\n2\nprint('third')\n4\n");
    assert_eq!(o.status.code(), Some(0));
    assert_eq!(
        stdout(&o),
        format!("first\n{}third\n{}", shown("2"), shown("4"))
    );
}

#[test]
fn options_after_no_command_apply_to_the_session() {
    // About 32 MiB of table: fine by default, too much for 16 MiB.
    let bomb = "local t = {} for i = 1, 2e6 do t[i] = i end\n1\n";
    let o = session(&["--memory-limit", "16"], bomb);
    assert_eq!(o.status.code(), Some(1));
    assert!(stderr(&o).contains("memory"), "{}", stderr(&o));
    assert_eq!(stdout(&o), shown("1"), "the session survives the bomb");
}

#[test]
fn crlf_input_is_accepted() {
    let o = session(&[], "function f(x)\r\n  return x + 1\r\nend\r\nf(1)\r\n");
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(stdout(&o), shown("2"));
}
