//! The read–eval–print loop: a [`Session`] (one [`Host`] plus what the
//! meta-commands need) and its two front ends.
//!
//! - [`run_interactive`]: a terminal on stdin and stdout — rustyline with history,
//!   Tab completion over live names, multi-line input while the chunk is
//!   incomplete, Ctrl-C to cancel a line or stop an evaluation, Ctrl-D to
//!   leave.
//! - [`run_batch`]: anything else (stdin or stdout a pipe or a file) — the same
//!   chunking (lines accumulate until the chunk is complete) and the same
//!   meta-commands, no prompt and no banner; results on stdout, errors on
//!   stderr, and the exit status says whether any chunk failed.
//!
//! An error in one chunk never ends the session.

pub mod helper;
pub mod meta;
pub mod signal;

use std::collections::BTreeSet;
use std::io::{self, BufRead, IsTerminal, Write};
use std::path::PathBuf;

use crate::lua::{Completeness, Host, HostError, HostOptions};
use meta::MetaCommand;

/// Exit status: every chunk ran.
pub const EXIT_OK: u8 = 0;
/// Exit status: a chunk (or the script) failed.
pub const EXIT_FAILURE: u8 = 1;

/// Chunk name for interactive entries (errors read `repl:LINE: ...`).
pub const INTERACTIVE_CHUNK: &str = "=repl";
/// Label of piped input in messages: `stdin:LINE: ...`, with LINE counted
/// from the start of the input.
pub const BATCH_LABEL: &str = "stdin";

/// Environment variable naming the history file; set but empty, history
/// is neither read nor written.
pub const HISTORY_ENV: &str = "MENISCUS_HISTORY";

/// Whether the session goes on after a meta-command.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Flow {
    /// Read the next input.
    Continue,
    /// End the session.
    Quit,
}

/// One Lua host plus the session state the meta-commands need.
pub struct Session {
    host: Host,
    /// Global names present when the state was made (API, libraries,
    /// plugins): `:list` shows what the user added on top.
    baseline: BTreeSet<String>,
    /// Interactive sessions confirm meta-commands such as `:reset`; piped
    /// ones stay quiet.
    interactive: bool,
}

impl Session {
    /// A session on a fresh host.
    pub fn new(options: HostOptions, interactive: bool) -> Result<Session, HostError> {
        let host = Host::new(options)?;
        let baseline = global_names(&host).into_iter().collect();
        Ok(Session {
            host,
            baseline,
            interactive,
        })
    }

    /// The host (for completion and validation).
    pub fn host(&self) -> &Host {
        &self.host
    }

    /// Whether the host was asked for full tracebacks.
    pub fn trace(&self) -> bool {
        self.host.options().trace
    }

    /// Whether `source` is a whole chunk yet.
    pub fn completeness(&self, source: &str) -> Completeness {
        self.host.completeness(source)
    }

    /// Evaluates one chunk and returns its values formatted for display
    /// (empty when it returned nothing). Ctrl-C stops it (interactive REPL).
    pub fn eval(&mut self, source: &str, chunk_name: &str) -> Result<String, HostError> {
        let values = {
            let _running = signal::Evaluating::new(self.host.interrupt_handle());
            self.host.eval(source, chunk_name)?
        };
        Ok(self.host.format_values(&values))
    }

    /// Carries out a meta-command. `Ok` holds the text to show on stdout
    /// (possibly empty); `Err` a one-line message for stderr.
    pub fn meta(&mut self, cmd: &MetaCommand) -> Result<(String, Flow), String> {
        match cmd {
            MetaCommand::Help(None) => Ok((guide(), Flow::Continue)),
            MetaCommand::Help(Some(name)) => self.help_on(name).map(|t| (t, Flow::Continue)),
            MetaCommand::List { all } => Ok((self.list(*all), Flow::Continue)),
            MetaCommand::Plugins => Ok((self.plugins(), Flow::Continue)),
            MetaCommand::Reset => {
                self.host
                    .reset()
                    .map_err(|e| format!("reset failed: {}", e.message))?;
                self.baseline = global_names(&self.host).into_iter().collect();
                let text = if self.interactive {
                    "fresh state: every definition is gone\n".to_string()
                } else {
                    String::new()
                };
                Ok((text, Flow::Continue))
            }
            MetaCommand::Quit => Ok((String::new(), Flow::Quit)),
        }
    }

    /// `:help NAME`: the host's own `help` function when there is one
    /// (it knows the API's documentation), else a description of the value.
    fn help_on(&mut self, name: &str) -> Result<String, String> {
        // The host's help registry first; a name it does not know may still
        // be a value defined in this session, which `describe` reports.
        let text = self.host.help_text(name);
        if !text.starts_with("no help for") {
            return Ok(text);
        }
        describe(&self.host, name).map_err(|_| text)
    }

    /// `:list [all]`.
    fn list(&self, all: bool) -> String {
        let names = global_names(&self.host);
        // Reading globals may run a script's __index function (Lua code):
        // only inside an evaluation, via `Host::run`.
        self.host
            .run(|lua| Ok(self.list_globals(&lua.globals(), &names, all)))
            .unwrap_or_else(|e| format!("cannot list the globals: {}\n", e.message))
    }

    fn list_globals(&self, globals: &mlua::Table, names: &[String], all: bool) -> String {
        let mut out = String::new();
        if all {
            for name in names {
                match globals.get::<mlua::Value>(name.as_str()) {
                    Ok(mlua::Value::Function(_)) => out.push_str(&format!("{name}()\n")),
                    Ok(mlua::Value::Table(t)) if name != "_G" => {
                        // A plugin namespace is a read-only view: list what it shows.
                        let t = crate::lua::readonly::inner(self.host.lua(), &t).unwrap_or(t);
                        let mut members: Vec<String> = t
                            .pairs::<mlua::Value, mlua::Value>()
                            .filter_map(|p| p.ok())
                            .filter(|(_, v)| matches!(v, mlua::Value::Function(_)))
                            .filter_map(|(k, _)| k.as_string().map(|s| s.to_string_lossy()))
                            .collect();
                        members.sort();
                        for m in members {
                            out.push_str(&format!("{name}.{m}()\n"));
                        }
                    }
                    _ => {}
                }
            }
            return out;
        }
        let added: Vec<&String> = names
            .iter()
            .filter(|n| !self.baseline.contains(*n))
            .collect();
        if added.is_empty() {
            return "nothing defined in this session yet (`:list all` shows every function)\n"
                .to_string();
        }
        let width = added.iter().map(|n| n.len()).max().unwrap_or(0);
        for name in added {
            let kind = match globals.get::<mlua::Value>(name.as_str()) {
                // What Lua's own type() says: integers are numbers too.
                Ok(mlua::Value::Integer(_)) => "number",
                Ok(v) => v.type_name(),
                Err(_) => "?",
            };
            out.push_str(&format!("{name:width$}  {kind}\n"));
        }
        out
    }

    /// `:plugins`: the plugins loaded (and those skipped, with the
    /// reason), then the directories searched and the plugin files in them.
    fn plugins(&self) -> String {
        let mut out = String::new();
        let loaded = self.host.plugins();
        if loaded.is_empty() {
            out.push_str("no plugins loaded\n");
        } else {
            out.push_str("loaded plugins:\n");
            let width = loaded.iter().map(|p| p.name.len()).max().unwrap_or(0);
            for p in &loaded {
                out.push_str(&format!(
                    "  {:width$}  {}  {}\n  {:width$}  from {}\n",
                    p.name,
                    p.version,
                    p.description,
                    "",
                    p.path.display()
                ));
            }
        }
        for problem in self.host.plugin_problems() {
            out.push_str(&format!("{problem}\n"));
        }
        let dirs = self.host.plugin_dirs();
        if dirs.is_empty() {
            out.push_str("no plugin directories (add one with --plugins DIR)\n");
            return out;
        }
        out.push_str("plugin directories, searched in this order (add more with --plugins DIR):\n");
        for dir in dirs {
            out.push_str(&format!("  {}\n", dir.display()));
            match plugin_files(&dir) {
                Ok(files) if files.is_empty() => out.push_str("    (no .lua files)\n"),
                Ok(files) => {
                    for f in files {
                        out.push_str(&format!("    {f}\n"));
                    }
                }
                Err(e) if e.kind() == io::ErrorKind::NotFound => {
                    out.push_str("    (does not exist)\n")
                }
                Err(e) => out.push_str(&format!("    (cannot read: {e})\n")),
            }
        }
        out
    }
}

/// Global names, sorted, as the host's completion sees them (so a host
/// that guards its globals behind a proxy table still lists correctly).
fn global_names(host: &Host) -> Vec<String> {
    let (_, mut names) = host.completions("", 0);
    if names.is_empty() {
        // A host that offers nothing for an empty word: read the table.
        names = host
            .lua()
            .globals()
            .pairs::<mlua::Value, mlua::Value>()
            .filter_map(|p| p.ok()?.0.as_string().map(|s| s.to_string_lossy()))
            .collect();
    }
    names.retain(|n| !n.is_empty() && n.chars().all(|c| c.is_alphanumeric() || c == '_'));
    names.sort();
    names.dedup();
    names
}

/// Plugin files in one directory, as the host finds them (`*.lua` files
/// and subdirectories with an `init.lua`), named relative to it, sorted.
fn plugin_files(dir: &std::path::Path) -> io::Result<Vec<String>> {
    Ok(crate::lua::plugins::plugin_files(dir)?
        .iter()
        .map(|p| {
            p.strip_prefix(dir)
                .unwrap_or(p)
                .to_string_lossy()
                .into_owned()
        })
        .collect())
}

/// Describes the global value at a dotted path (`math`, `string.format`).
fn describe(host: &Host, name: &str) -> Result<String, String> {
    // Indexing may run a script's __index function: that is Lua code, so
    // it runs as an evaluation (time limit, memory limit), via `Host::run`.
    let found = host.run(|lua| {
        let mut value = mlua::Value::Table(lua.globals());
        for part in name.split(['.', ':']) {
            let next = match &value {
                mlua::Value::Table(t) => t.get::<mlua::Value>(part).ok(),
                _ => None,
            };
            match next {
                Some(v) if !v.is_nil() => value = v,
                _ => return Ok(None),
            }
        }
        Ok(Some(value))
    });
    let Ok(Some(value)) = found else {
        return Err(format!("no global named '{name}' (try :list all)"));
    };
    Ok(match value {
        mlua::Value::Function(_) => format!("{name} is a function\n"),
        mlua::Value::Table(t) => {
            // A plugin namespace is a read-only view: describe what it shows.
            let t = crate::lua::readonly::inner(host.lua(), &t).unwrap_or(t);
            let mut keys: Vec<String> = t
                .pairs::<mlua::Value, mlua::Value>()
                .filter_map(|p| p.ok())
                .filter_map(|(k, v)| {
                    let k = k.as_string()?.to_string_lossy();
                    Some(if v.is_function() { format!("{k}()") } else { k })
                })
                .collect();
            keys.sort();
            format!("{name} is a table: {}\n", keys.join(" "))
        }
        other => {
            let shown = host.format_values(&mlua::MultiValue::from_iter([other]));
            format!("{name} = {shown}\n")
        }
    })
}

/// The `:help` guide.
pub fn guide() -> String {
    format!(
        "Type Lua to evaluate it; a bare expression prints its value.\n\
         A chunk may span several lines: input continues while it is incomplete.\n\
         Tab completes names (also the ones you defined); Ctrl-C cancels the line\n\
         or stops a running calculation; Ctrl-D leaves.\n\
         \n\
         Commands (a colon, then the name; any unambiguous prefix works):\n\
         {}\n\
         Results are calculations, not certified measurements. Excise and labelling\n\
         declarations must use the tables and instruments your authority prescribes.\n",
        meta::command_table()
    )
}

/// The lines shown on stderr for a failed chunk: `error: file:line: message`,
/// then the traceback when `trace` is on.
pub fn error_report(err: &HostError, trace: bool) -> String {
    let mut out = format!("error: {}\n", err.message.trim_end());
    if trace {
        if let Some(tb) = &err.traceback {
            let mut lines = tb.trim_end().lines().peekable();
            // The traceback may restate the message; once is enough.
            if lines.peek().is_some_and(|l| l.trim() == err.message.trim()) {
                lines.next();
            }
            for line in lines {
                out.push_str(line);
                out.push('\n');
            }
        }
    }
    out
}

/// Rewrites every `label:START:LINE` (a location in a chunk named
/// `label:START`, the chunk's first input line) into `label:N`, the line
/// of the input, N = START + LINE - 1.
pub fn absolute_lines(text: &str, label: &str) -> String {
    let needle = format!("{label}:");
    let mut out = String::with_capacity(text.len());
    let mut rest = text;
    while let Some(i) = rest.find(&needle) {
        // `label` must start a word: `xstdin:3:4` is something else.
        let at_word_start = !rest[..i]
            .chars()
            .next_back()
            .is_some_and(|c| c.is_alphanumeric() || c == '_');
        let after = &rest[i + needle.len()..];
        out.push_str(&rest[..i + needle.len()]);
        rest = after;
        let start_len = after.bytes().take_while(u8::is_ascii_digit).count();
        let tail = &after[start_len..];
        let line_len = tail
            .strip_prefix(':')
            .map_or(0, |t| t.bytes().take_while(u8::is_ascii_digit).count());
        if !at_word_start || start_len == 0 || line_len == 0 {
            continue;
        }
        let start = after[..start_len].parse::<usize>();
        let line = tail[1..1 + line_len].parse::<usize>();
        if let (Ok(start), Ok(line)) = (start, line) {
            out.push_str(&(start + line).saturating_sub(1).to_string());
            rest = &tail[1 + line_len..];
        }
    }
    out.push_str(rest);
    out
}

/// Where the history lives: `$MENISCUS_HISTORY` if set (empty: no
/// history), else `<data dir>/meniscus/history` (on Linux
/// `$XDG_DATA_HOME/meniscus/history`, by default
/// `~/.local/share/meniscus/history`).
pub fn history_path() -> Option<PathBuf> {
    match std::env::var_os(HISTORY_ENV) {
        Some(p) if p.is_empty() => None,
        Some(p) => Some(PathBuf::from(p)),
        None => dirs::data_dir().map(|d| d.join("meniscus").join("history")),
    }
}

/// Runs the REPL on the process's stdin: interactive when stdin and stdout
/// are both terminals, batch otherwise (so `meniscus > results.txt` gets
/// results, not prompts and terminal escapes). Returns the exit status.
pub fn run(options: HostOptions) -> u8 {
    if io::stdin().is_terminal() && io::stdout().is_terminal() {
        run_interactive(options)
    } else {
        let stdin = io::stdin();
        let stdout = io::stdout();
        let stderr = io::stderr();
        run_batch(options, stdin.lock(), stdout.lock(), stderr.lock())
    }
}

/// Writes `text` to stdout-like `out`; `false` when the reader went away
/// (broken pipe), which ends output quietly.
fn emit(out: &mut dyn Write, text: &str) -> io::Result<bool> {
    if text.is_empty() {
        return Ok(true);
    }
    let r = out.write_all(text.as_bytes()).and_then(|_| {
        if !text.ends_with('\n') {
            out.write_all(b"\n")?;
        }
        out.flush()
    });
    match r {
        Ok(()) => Ok(true),
        Err(e) if e.kind() == io::ErrorKind::BrokenPipe => Ok(false),
        Err(e) => Err(e),
    }
}

/// The batch front end: chunks from `input`, results to `out`, errors to
/// `err`. Returns [`EXIT_FAILURE`] if any chunk or command failed.
pub fn run_batch(
    options: HostOptions,
    mut input: impl BufRead,
    mut out: impl Write,
    mut err: impl Write,
) -> u8 {
    let options_trace = options.trace;
    let mut session = match Session::new(options, false) {
        Ok(s) => s,
        Err(e) => {
            let _ = err.write_all(error_report(&e, options_trace).as_bytes());
            return EXIT_FAILURE;
        }
    };
    let label = BATCH_LABEL;
    let mut failed = false;
    let mut pending = String::new();
    let mut pending_start = 0usize;
    let mut line_no = 0usize;
    let mut raw = Vec::new();

    loop {
        raw.clear();
        match input.read_until(b'\n', &mut raw) {
            Ok(0) => break,
            Ok(_) => {}
            Err(e) => {
                let _ = writeln!(err, "error: cannot read input after line {line_no}: {e}");
                failed = true;
                break;
            }
        }
        line_no += 1;
        let Ok(line) = std::str::from_utf8(&raw) else {
            let _ = writeln!(
                err,
                "error: {label}:{line_no}: line is not valid UTF-8; it and the chunk it was part of are skipped"
            );
            failed = true;
            pending.clear();
            continue;
        };
        let line = line.trim_end_matches(['\n', '\r']);
        if pending.is_empty() {
            if line.trim().is_empty() {
                continue;
            }
            if let Some(cmd) = MetaCommand::parse(line) {
                let result = cmd
                    .map_err(|e| e.to_string())
                    .and_then(|cmd| session.meta(&cmd));
                match result {
                    Ok((text, flow)) => {
                        match emit(&mut out, &text) {
                            Ok(true) => {}
                            Ok(false) => break,
                            Err(e) => {
                                let _ = writeln!(err, "error: cannot write output: {e}");
                                failed = true;
                                break;
                            }
                        }
                        if flow == Flow::Quit {
                            break;
                        }
                    }
                    Err(msg) => {
                        failed = true;
                        let _ = writeln!(err, "error: {label}:{line_no}: {msg}");
                    }
                }
                continue;
            }
            pending_start = line_no;
        }
        pending.push_str(line);
        pending.push('\n');
        if session.completeness(&pending) == Completeness::Complete {
            let chunk = std::mem::take(&mut pending);
            let open = eval_chunk(
                &mut session,
                &chunk,
                pending_start,
                &mut failed,
                &mut out,
                &mut err,
            );
            if !open {
                break;
            }
        }
    }
    // Input ended inside a chunk: evaluating it reports where it broke off.
    if !pending.is_empty() {
        eval_chunk(
            &mut session,
            &pending,
            pending_start,
            &mut failed,
            &mut out,
            &mut err,
        );
    }
    if failed {
        EXIT_FAILURE
    } else {
        EXIT_OK
    }
}

/// Evaluates one piped chunk that started on input line `start`, printing
/// its values or its error. Returns false once output can no longer be
/// written (the reader went away, or writing failed).
fn eval_chunk(
    session: &mut Session,
    chunk: &str,
    start: usize,
    failed: &mut bool,
    out: &mut dyn Write,
    err: &mut dyn Write,
) -> bool {
    // Lua numbers lines from the start of each chunk. Each chunk is named
    // after its first input line (`stdin:41`), so every location Lua
    // reports reads `stdin:41:3`, also for a function defined in an earlier
    // chunk and called from this one; `absolute_lines` turns that into the
    // input line, `stdin:43`. (Padding the chunk with blank lines would do
    // the same at a cost growing with the square of the input length.)
    let name = format!("={BATCH_LABEL}:{start}");
    match session.eval(chunk, &name) {
        Ok(text) => match emit(out, &text) {
            Ok(open) => open,
            Err(e) => {
                let _ = writeln!(err, "error: cannot write output: {e}");
                *failed = true;
                false
            }
        },
        Err(e) => {
            *failed = true;
            let report = error_report(&e, session.trace());
            let _ = err.write_all(absolute_lines(&report, BATCH_LABEL).as_bytes());
            true
        }
    }
}

/// The interactive front end (stdin is a terminal). Returns the exit
/// status: 0 after `:quit` or Ctrl-D, 1 if the terminal failed.
pub fn run_interactive(options: HostOptions) -> u8 {
    use rustyline::error::ReadlineError;

    let session = match Session::new(options, true) {
        Ok(s) => s,
        Err(e) => {
            eprint!("{}", error_report(&e, false));
            return EXIT_FAILURE;
        }
    };
    let trace = session.trace();
    let session = std::rc::Rc::new(std::cell::RefCell::new(session));
    let mut editor = match helper::editor(session.clone()) {
        Ok(e) => e,
        Err(e) => {
            eprintln!("error: cannot set up the line editor: {e}");
            return EXIT_FAILURE;
        }
    };
    if let Err(e) = signal::install() {
        eprintln!("warning: Ctrl-C will end the program, not just the calculation ({e})");
    }
    // History is appended after every entry, so it survives a second Ctrl-C
    // (which ends the process) and merges with other running sessions.
    let history = history_path();
    let mut history_warned = false;
    if let Some(path) = &history {
        if path.exists() {
            if let Err(e) = editor.load_history(path) {
                eprintln!("warning: cannot read history {}: {e}", path.display());
            }
        } else if let Some(dir) = path.parent() {
            // A failure shows up, once, when the first entry is saved.
            let _ = std::fs::create_dir_all(dir);
        }
    }
    println!(
        "meniscus {} · :help for help, :quit or Ctrl-D to leave",
        env!("CARGO_PKG_VERSION")
    );

    let mut status = EXIT_OK;
    loop {
        let entry = match editor.readline("meniscus> ") {
            Ok(entry) => entry,
            // Ctrl-C while editing: drop the line, keep the session.
            Err(ReadlineError::Interrupted) => continue,
            Err(ReadlineError::Eof) => break,
            Err(e) => {
                eprintln!("error: cannot read input: {e}");
                status = EXIT_FAILURE;
                break;
            }
        };
        if entry.trim().is_empty() {
            continue;
        }
        let _ = editor.add_history_entry(entry.as_str());
        if let Some(path) = &history {
            if let Err(e) = editor.append_history(path) {
                if !history_warned {
                    eprintln!("warning: cannot save history {}: {e}", path.display());
                    history_warned = true;
                }
            }
        }
        let mut stdout = io::stdout();
        if let Some(cmd) = MetaCommand::parse(&entry) {
            let result = cmd
                .map_err(|e| e.to_string())
                .and_then(|cmd| session.borrow_mut().meta(&cmd));
            match result {
                Ok((text, flow)) => {
                    let _ = emit(&mut stdout, &text);
                    if flow == Flow::Quit {
                        break;
                    }
                }
                Err(msg) => eprintln!("error: {msg}"),
            }
            continue;
        }
        let result = session.borrow_mut().eval(&entry, INTERACTIVE_CHUNK);
        match result {
            Ok(text) => {
                let _ = emit(&mut stdout, &text);
            }
            Err(e) => eprint!("{}", error_report(&e, trace)),
        }
    }
    status
}

#[cfg(test)]
mod tests {
    use super::*;

    fn batch(input: &str) -> (u8, String, String) {
        let mut out = Vec::new();
        let mut err = Vec::new();
        let code = run_batch(HostOptions::default(), input.as_bytes(), &mut out, &mut err);
        (
            code,
            String::from_utf8(out).unwrap(),
            String::from_utf8(err).unwrap(),
        )
    }

    /// How the host shows the value of `expr` (the tests do not assume a
    /// display format: that is the host's business).
    fn shown(expr: &str) -> String {
        let host = Host::new(HostOptions::default()).unwrap();
        host.format_values(&host.eval(expr, "=expected").unwrap())
    }

    #[test]
    fn chunk_locations_become_input_lines() {
        assert_eq!(
            absolute_lines("stdin:10:3: oops", "stdin"),
            "stdin:12: oops"
        );
        assert_eq!(
            absolute_lines(
                "error: stdin:1:1: a\n\tstdin:4:2: in function <stdin:4:1>\n",
                "stdin"
            ),
            "error: stdin:1: a\n\tstdin:5: in function <stdin:4>\n"
        );
        for untouched in [
            "xstdin:2:3: no",
            "stdin:: no",
            "stdin:2 no",
            "stdin:2: x",
            "stdin:a:1",
        ] {
            assert_eq!(absolute_lines(untouched, "stdin"), untouched);
        }
    }

    #[test]
    fn error_report_adds_traceback_only_with_trace() {
        let e = HostError {
            message: "x.lua:3: boom".into(),
            traceback: Some("x.lua:3: boom\nstack traceback:\n\tx.lua:3: in main chunk".into()),
        };
        assert_eq!(error_report(&e, false), "error: x.lua:3: boom\n");
        let full = error_report(&e, true);
        assert!(
            full.starts_with("error: x.lua:3: boom\nstack traceback:\n"),
            "{full}"
        );
        assert_eq!(full.matches("boom").count(), 1, "{full}");
    }

    #[test]
    fn batch_accumulates_lines_until_the_chunk_is_complete() {
        let (code, out, err) = batch("function sq(x)\n  return x * x\nend\nsq(7)\n");
        assert_eq!(
            (code, out.trim(), err.as_str()),
            (0, shown("49").as_str(), "")
        );
    }

    #[test]
    fn batch_goes_on_after_an_error_and_reports_input_lines() {
        let (code, out, err) = batch("1 + 1\n\nlocal t = nil\nreturn t.x\n3\n");
        assert_eq!(code, 1);
        assert_eq!(out, format!("{}\n{}\n", shown("2"), shown("3")));
        assert!(err.contains("stdin:4:"), "{err}");
    }

    #[test]
    fn batch_meta_commands() {
        let (code, out, err) = batch("zz_mine = function() end\n:list\n:reset\n:list\n:quit\n1\n");
        assert_eq!(code, 0, "{err}");
        assert!(out.contains("zz_mine"), "{out}");
        assert!(out.contains("nothing defined"), "{out}");
        assert!(
            !out.lines().any(|l| l == shown("1")),
            ":quit did not stop: {out}"
        );
    }

    #[test]
    fn batch_bad_meta_command_is_an_error_not_the_end() {
        let (code, out, err) = batch(":nonsense\n2 * 3\n");
        assert_eq!(code, 1);
        assert_eq!(out.trim(), shown("6"));
        assert!(
            err.contains("stdin:1:") && err.contains(":nonsense"),
            "{err}"
        );
    }

    #[test]
    fn batch_unfinished_chunk_at_end_of_input_fails() {
        let (code, _, err) = batch("function f()\n  return 1\n");
        assert_eq!(code, 1);
        assert!(err.contains("error:"), "{err}");
    }

    #[test]
    fn batch_invalid_utf8_line_is_reported_and_skipped() {
        let mut out = Vec::new();
        let mut err = Vec::new();
        let input: &[u8] = b"1\n\xff\xfe\n2\n";
        let code = run_batch(HostOptions::default(), input, &mut out, &mut err);
        assert_eq!(code, 1);
        assert_eq!(
            String::from_utf8(out).unwrap(),
            format!("{}\n{}\n", shown("1"), shown("2"))
        );
        assert!(String::from_utf8(err)
            .unwrap()
            .contains("stdin:2: line is not valid UTF-8"));
    }

    #[test]
    fn plugin_files_are_lua_files_and_packages() {
        let dir = tempfile::tempdir().unwrap();
        let d = dir.path();
        std::fs::write(d.join("cellar_tools.lua"), "").unwrap();
        std::fs::write(d.join("notes.txt"), "").unwrap();
        std::fs::create_dir(d.join("blending")).unwrap();
        std::fs::write(d.join("blending").join("init.lua"), "").unwrap();
        std::fs::create_dir(d.join("empty_dir")).unwrap();
        assert_eq!(
            plugin_files(d).unwrap(),
            ["blending/init.lua", "cellar_tools.lua"]
        );
        assert!(plugin_files(&d.join("missing")).is_err());
    }

    #[test]
    fn describe_walks_dotted_names() {
        let host = Host::new(HostOptions::default()).unwrap();
        assert!(describe(&host, "math").unwrap().contains("sin()"));
        assert_eq!(
            describe(&host, "math.sin").unwrap(),
            "math.sin is a function\n"
        );
        assert!(describe(&host, "math.nope")
            .unwrap_err()
            .contains("'math.nope'"));
        assert!(describe(&host, "math.pi.x").is_err());
    }

    #[test]
    fn describe_and_list_show_what_a_plugin_namespace_offers() {
        // A plugin namespace is an empty read-only view of its table:
        // `:help name` and `:list all` must show the functions behind it.
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(
            dir.path().join("cellar.lua"),
            "return { name = 'cellar', version = '0.1', api = 1, description = 'test',
               functions = { dip = { fn = function(x) return x end, doc = 'd',
                                     args = { { name = 'x', doc = 'x' } } } } }",
        )
        .unwrap();
        let options = HostOptions {
            plugin_dirs: vec![dir.path().to_path_buf()],
            standard_plugin_dirs: false,
            ..HostOptions::default()
        };
        let session = Session::new(options, false).unwrap();
        let host = session.host();
        assert_eq!(
            host.plugins()
                .iter()
                .map(|p| p.name.as_str())
                .collect::<Vec<_>>(),
            ["cellar"]
        );
        assert_eq!(
            describe(host, "cellar").unwrap(),
            "cellar is a table: dip()\n"
        );
        assert!(session.list(true).contains("cellar.dip()\n"));
    }

    #[test]
    fn describe_runs_index_metamethods_as_an_evaluation() {
        // An __index function is script code: outside an evaluation the
        // host stops it at its first hook check, so `:help` must look the
        // name up inside one (over 10 000 instructions here).
        let host = Host::new(HostOptions::default()).unwrap();
        host.eval(
            "lazy = setmetatable({}, {__index = function(_, k) \
               local s = 0 for i = 1, 100000 do s = s + i end return s end})",
            "=test",
        )
        .unwrap();
        assert_eq!(
            describe(&host, "lazy.total").unwrap(),
            "lazy.total = 5000050000\n"
        );
    }
}
