//! The `meniscus` command line: argument definitions (clap, derive), the
//! conversion of arguments into [`HostOptions`], and [`run`], which carries
//! out one invocation and returns its exit status.
//!
//! Exit status: 0 success, 1 the script or a chunk failed, 2 usage error
//! (bad option, bad value, unreadable script file).

use std::io::{self, Write};
use std::path::PathBuf;
use std::time::Duration;

use clap::{Args, Parser, Subcommand};

use crate::lua::{Host, HostOptions};
use crate::repl;

/// Exit status: success.
pub const EXIT_OK: u8 = repl::EXIT_OK;
/// Exit status: the script or a chunk failed.
pub const EXIT_FAILURE: u8 = repl::EXIT_FAILURE;
/// Exit status: the command line was wrong.
pub const EXIT_USAGE: u8 = 2;

/// Largest accepted `--memory-limit`, in MiB (1 TiB).
const MAX_MEMORY_MIB: u64 = 1 << 20;
/// Largest accepted `--timeout`, in seconds (one year).
const MAX_TIMEOUT_S: f64 = 365.0 * 24.0 * 3600.0;

const LONG_ABOUT: &str = "\
Volumetrics of liquid mixtures: strength conversions, density and
temperature corrections, pure-alcohol accounting, reductions and blends,
for ethanol-water (OIML R 22) and other binary mixtures, scriptable in Lua.

With no command, starts an interactive session (a REPL) when stdin and
stdout are terminals; otherwise evaluates the chunks read from stdin, one
after another, printing results only.";

const AFTER_LONG_HELP: &str = "\
Examples:
  meniscus                                  interactive session
  meniscus eval '2 * 40'                    print the value of a chunk
  meniscus run reduce.lua tank7 450         run a script; arg[1] = \"tank7\"
  meniscus --timeout 10 run nightly.lua     stop the script after 10 s
  meniscus < batch.lua                      evaluate piped chunks one by one

Options may stand before or after the command; for `run`, everything after
the script name goes to the script (use `meniscus run --trace x.lua a b`).

Exit status: 0 success; 1 the script or a chunk failed; 2 usage error
(unknown option, bad value, unreadable script file).

Session commands (interactive or piped; a colon, then the name):
  :help [name]  :list [all]  :plugins  :reset  :quit     (see :help)
History: $MENISCUS_HISTORY if set (empty: none), else the user data
directory (Linux: $XDG_DATA_HOME/meniscus/history).

Cautions:
  - Results are calculations, not certified measurements; they are only as
    good as the readings, the instrument calibration and the model's range.
  - Excise and labelling declarations must use the tables and instruments
    prescribed by the competent authority, not this program's output.
  - High-strength ethanol is flammable: vapour ignites easily. Follow the
    site's safety rules.
  - Defer to local regulations and licensed practice.";

/// `meniscus [OPTIONS] [COMMAND]`.
#[derive(Debug, Parser)]
#[command(
    name = "meniscus",
    version,
    about = "Volumetrics of liquid mixtures, scriptable in Lua",
    long_about = LONG_ABOUT,
    after_long_help = AFTER_LONG_HELP,
)]
pub struct Cli {
    /// Options shared by every command.
    #[command(flatten)]
    pub options: GlobalOptions,
    /// What to do; none starts the REPL.
    #[command(subcommand)]
    pub command: Option<Command>,
}

/// Options valid before or after the command.
#[derive(Debug, Args)]
pub struct GlobalOptions {
    /// Load plugins from DIR (repeatable)
    #[arg(long = "plugins", value_name = "DIR", global = true, value_parser = existing_dir)]
    pub plugin_dirs: Vec<PathBuf>,

    /// Let scripts read and write files under DIR too, besides the working
    /// directory (repeatable)
    #[arg(long = "allow-path", value_name = "DIR", global = true, value_parser = existing_dir)]
    pub allow_paths: Vec<PathBuf>,

    /// Memory limit of the Lua state, in MiB (1 MiB = 1,048,576 bytes)
    #[arg(long, value_name = "MB", global = true, default_value_t = 1024, value_parser = memory_limit_mib)]
    pub memory_limit: u64,

    /// Stop any single evaluation after SECONDS of wall-clock time (decimals
    /// allowed); no limit by default
    #[arg(long, value_name = "SECONDS", global = true, value_parser = timeout)]
    pub timeout: Option<Duration>,

    /// Print the full Lua traceback of an error on stderr
    #[arg(long, global = true)]
    pub trace: bool,
}

/// The commands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Run a Lua script; ARGS reach it as the global table `arg`
    /// (arg[0] the script, arg[1].. the arguments)
    Run {
        /// The script, then the arguments for it (everything after the
        /// script name goes to the script, options included)
        #[arg(
            value_names = ["FILE.lua", "ARGS"],
            required = true,
            num_args = 1..,
            trailing_var_arg = true,
            allow_hyphen_values = true
        )]
        script_and_args: Vec<String>,
    },
    /// Evaluate a chunk and print what it returns (a bare expression works)
    Eval {
        /// Lua source, e.g. '1 + 1' or 'local x = 2; return x * x'
        #[arg(value_name = "CHUNK")]
        chunk: String,
    },
}

impl GlobalOptions {
    /// The host options these arguments ask for.
    pub fn host_options(&self) -> HostOptions {
        HostOptions {
            plugin_dirs: self.plugin_dirs.clone(),
            standard_plugin_dirs: true,
            allow_paths: self.allow_paths.clone(),
            // memory_limit_mib() bounds the value, so this cannot overflow.
            memory_limit: usize::try_from(self.memory_limit * 1024 * 1024).unwrap_or(usize::MAX),
            timeout: self.timeout,
            trace: self.trace,
        }
    }
}

fn existing_dir(s: &str) -> Result<PathBuf, String> {
    let p = PathBuf::from(s);
    match std::fs::metadata(&p) {
        Ok(m) if m.is_dir() => Ok(p),
        Ok(_) => Err(format!("'{s}' is not a directory")),
        Err(e) => Err(format!("cannot use directory '{s}': {e}")),
    }
}

fn memory_limit_mib(s: &str) -> Result<u64, String> {
    let n: u64 = s
        .trim()
        .parse()
        .map_err(|_| format!("'{s}' is not a whole number of MiB (e.g. 512)"))?;
    if n == 0 || n > MAX_MEMORY_MIB {
        return Err(format!("{n} MiB is out of range (1 to {MAX_MEMORY_MIB})"));
    }
    Ok(n)
}

fn timeout(s: &str) -> Result<Duration, String> {
    let secs: f64 = s
        .trim()
        .parse()
        .map_err(|_| format!("'{s}' is not a number of seconds (e.g. 2.5)"))?;
    if !(secs.is_finite() && secs > 0.0 && secs <= MAX_TIMEOUT_S) {
        return Err(format!(
            "{s} s is out of range (more than 0, at most {MAX_TIMEOUT_S} s)"
        ));
    }
    Ok(Duration::from_secs_f64(secs))
}

/// Prints a clap error or the help/version text it carries and returns
/// the matching exit status (0 for `--help`/`--version`, 2 otherwise).
pub fn report_parse_error(err: clap::Error) -> u8 {
    // A closed stdout while printing help is not worth an error.
    let _ = err.print();
    if err.use_stderr() {
        EXIT_USAGE
    } else {
        EXIT_OK
    }
}

/// Carries out one invocation; returns the exit status.
pub fn run(cli: Cli) -> u8 {
    let options = cli.options.host_options();
    match cli.command {
        None => repl::run(options),
        Some(Command::Eval { chunk }) => eval(options, &chunk),
        Some(Command::Run { script_and_args }) => match script_and_args.split_first() {
            Some((file, args)) => run_script(options, std::path::Path::new(file), args),
            None => {
                eprintln!("error: `run` needs a script file");
                EXIT_USAGE
            }
        },
    }
}

fn new_host(options: HostOptions) -> Result<Host, u8> {
    let trace = options.trace;
    Host::new(options).map_err(|e| {
        eprint!("{}", repl::error_report(&e, trace));
        EXIT_FAILURE
    })
}

fn eval(options: HostOptions, chunk: &str) -> u8 {
    let host = match new_host(options) {
        Ok(h) => h,
        Err(code) => return code,
    };
    match host.eval(chunk, "=eval") {
        Ok(values) => {
            let text = host.format_values(&values);
            if text.is_empty() {
                return EXIT_OK;
            }
            let mut out = io::stdout().lock();
            match writeln!(out, "{text}").and_then(|_| out.flush()) {
                Ok(()) => EXIT_OK,
                Err(e) if e.kind() == io::ErrorKind::BrokenPipe => EXIT_OK,
                Err(e) => {
                    eprintln!("error: cannot write output: {e}");
                    EXIT_FAILURE
                }
            }
        }
        Err(e) => {
            eprint!("{}", repl::error_report(&e, host.options().trace));
            EXIT_FAILURE
        }
    }
}

fn run_script(options: HostOptions, file: &std::path::Path, args: &[String]) -> u8 {
    // An unreadable script is a mistake on the command line, not in a script.
    match std::fs::metadata(file) {
        Ok(m) if m.is_file() => {}
        Ok(_) => {
            eprintln!("error: '{}' is not a file", file.display());
            return EXIT_USAGE;
        }
        Err(e) => {
            eprintln!("error: cannot read script '{}': {e}", file.display());
            return EXIT_USAGE;
        }
    }
    let host = match new_host(options) {
        Ok(h) => h,
        Err(code) => return code,
    };
    match host.run_file(file, args) {
        Ok(()) => EXIT_OK,
        Err(e) => {
            eprint!("{}", repl::error_report(&e, host.options().trace));
            EXIT_FAILURE
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::CommandFactory;

    #[test]
    fn definition_is_consistent() {
        Cli::command().debug_assert();
    }

    #[test]
    fn options_before_and_after_the_command() {
        let a = Cli::try_parse_from(["m", "--trace", "--memory-limit", "64", "eval", "1"]).unwrap();
        let b = Cli::try_parse_from(["m", "eval", "1", "--trace", "--memory-limit", "64"]).unwrap();
        for cli in [a, b] {
            assert!(cli.options.trace);
            assert_eq!(cli.options.host_options().memory_limit, 64 << 20);
        }
    }

    #[test]
    fn script_arguments_keep_their_dashes() {
        let cli =
            Cli::try_parse_from(["m", "run", "--trace", "x.lua", "--trace", "-n", "3"]).unwrap();
        assert!(cli.options.trace);
        match cli.command {
            Some(Command::Run { script_and_args }) => {
                assert_eq!(script_and_args, ["x.lua", "--trace", "-n", "3"]);
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn bad_values_are_usage_errors() {
        for argv in [
            vec!["m", "--memory-limit", "0"],
            vec!["m", "--memory-limit", "lots"],
            vec!["m", "--memory-limit", "-5"],
            vec!["m", "--memory-limit", "99999999999999"],
            vec!["m", "--timeout", "0"],
            vec!["m", "--timeout", "NaN"],
            vec!["m", "--timeout", "inf"],
            vec!["m", "--timeout", "-1"],
            vec!["m", "--plugins", "/nonexistent/meniscus-test"],
            vec!["m", "frobnicate"],
        ] {
            let err = Cli::try_parse_from(&argv).unwrap_err();
            assert!(err.use_stderr(), "{argv:?}");
            assert_eq!(err.exit_code(), i32::from(EXIT_USAGE), "{argv:?}");
        }
    }

    #[test]
    fn defaults() {
        let cli = Cli::try_parse_from(["m"]).unwrap();
        let o = cli.options.host_options();
        assert_eq!(o.memory_limit, 1024 * 1024 * 1024);
        assert_eq!(o.timeout, None);
        assert!(!o.trace && o.plugin_dirs.is_empty() && o.allow_paths.is_empty());
        assert!(cli.command.is_none());
        let cli = Cli::try_parse_from(["m", "--timeout", "0.25", "eval", "1"]).unwrap();
        assert_eq!(cli.options.timeout, Some(Duration::from_millis(250)));
    }
}
