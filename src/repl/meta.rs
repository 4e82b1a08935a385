//! REPL meta-commands: the words that talk to the session rather than to Lua.
//!
//! A meta-command is a line that starts with a colon followed by a letter
//! (`:help`, `:list all`, `:q`). The colon was chosen because no Lua chunk
//! can start with a single colon: the only Lua construct that begins with
//! `:` is a goto label, `::name::`, which starts with two colons and is
//! therefore never taken for a meta-command. (A leading dot would clash with
//! number literals such as `.5 * 2`.)
//!
//! The commands are defined once here, as [`MetaCommand`], with one parser
//! ([`MetaCommand::parse`]) shared by every front end (interactive REPL,
//! piped input, and whatever comes later).

use std::fmt;

/// The character that introduces a meta-command.
pub const PREFIX: char = ':';

/// One meta-command, parsed.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum MetaCommand {
    /// `:help [name]` — the REPL guide, or help on one global name
    /// (`string.format`, a plugin function, a user function).
    Help(Option<String>),
    /// `:list [all]` — the globals defined in this session; with `all`,
    /// every global function, library members included.
    List {
        /// List every global function, not only the session's own.
        all: bool,
    },
    /// `:plugins` — the plugin directories and the plugin files in them.
    Plugins,
    /// `:reset` — drop every definition: a fresh Lua state, same options.
    Reset,
    /// `:quit` — end the session (Ctrl-D does the same).
    Quit,
}

/// Why a meta-command line could not be parsed.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum MetaError {
    /// The word after the colon names no command.
    #[error("unknown command ':{0}' (type :help for the list of commands)")]
    Unknown(String),
    /// The word after the colon is the start of several commands.
    #[error("':{word}' is ambiguous: it could be {}", .candidates.iter().map(|c| format!(":{c}")).collect::<Vec<_>>().join(", "))]
    Ambiguous {
        /// What was typed.
        word: String,
        /// The commands it could mean.
        candidates: Vec<&'static str>,
    },
    /// The command got an argument it does not take.
    #[error("':{command}' takes {expected}, got '{got}'")]
    BadArgument {
        /// The command's full name.
        command: &'static str,
        /// What it accepts, in words.
        expected: &'static str,
        /// The offending argument text.
        got: String,
    },
}

/// The name, aliases, synopsis and description of one command, for help
/// text and completion.
#[derive(Debug, Clone, Copy)]
pub struct CommandInfo {
    /// Full name, without the colon.
    pub name: &'static str,
    /// Other accepted names, without the colon.
    pub aliases: &'static [&'static str],
    /// Arguments, as shown in help (`"[name]"`), or empty.
    pub args: &'static str,
    /// One line saying what the command does.
    pub description: &'static str,
}

/// Every meta-command, in the order help lists them.
pub const COMMANDS: &[CommandInfo] = &[
    CommandInfo {
        name: "help",
        aliases: &["h", "?"],
        args: "[name]",
        description: "this guide, or help on one name (a function, a library, a plugin)",
    },
    CommandInfo {
        name: "list",
        aliases: &["ls"],
        args: "[all]",
        description: "globals defined in this session; `all`: every global function",
    },
    CommandInfo {
        name: "plugins",
        aliases: &[],
        args: "",
        description: "plugin directories (--plugins) and the plugin files in them",
    },
    CommandInfo {
        name: "reset",
        aliases: &[],
        args: "",
        description: "forget every definition: a fresh Lua state with the same options",
    },
    CommandInfo {
        name: "quit",
        aliases: &["q", "exit"],
        args: "",
        description: "leave the session (Ctrl-D does the same)",
    },
];

/// Whether `line` is meant as a meta-command: a colon, then a letter or
/// `?`, after optional leading blanks. `::label::` (a Lua goto label) is not.
pub fn is_meta(line: &str) -> bool {
    let mut chars = line.trim_start().chars();
    chars.next() == Some(PREFIX)
        && matches!(chars.next(), Some(c) if c.is_ascii_alphabetic() || c == '?')
}

impl MetaCommand {
    /// Parses one line. `None` when the line is not a meta-command (hand it
    /// to Lua); `Some(Err(..))` when it is one but malformed.
    ///
    /// A command may be abbreviated to any unambiguous prefix of its name
    /// (`:he`, `:pl`); aliases must be typed in full.
    pub fn parse(line: &str) -> Option<Result<MetaCommand, MetaError>> {
        if !is_meta(line) {
            return None;
        }
        let body = line.trim().trim_start_matches(PREFIX);
        let (word, rest) = match body.split_once(char::is_whitespace) {
            Some((w, r)) => (w, r.trim()),
            None => (body, ""),
        };
        Some(resolve(word).and_then(|info| build(info, rest)))
    }

    /// The command's full name, without the colon.
    pub fn name(&self) -> &'static str {
        match self {
            MetaCommand::Help(_) => "help",
            MetaCommand::List { .. } => "list",
            MetaCommand::Plugins => "plugins",
            MetaCommand::Reset => "reset",
            MetaCommand::Quit => "quit",
        }
    }
}

impl fmt::Display for MetaCommand {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{PREFIX}{}", self.name())?;
        match self {
            MetaCommand::Help(Some(name)) => write!(f, " {name}"),
            MetaCommand::List { all: true } => write!(f, " all"),
            _ => Ok(()),
        }
    }
}

/// Finds the command a (possibly abbreviated) word names.
fn resolve(word: &str) -> Result<&'static CommandInfo, MetaError> {
    let word_lc = word.to_ascii_lowercase();
    if let Some(info) = COMMANDS
        .iter()
        .find(|c| c.name == word_lc || c.aliases.contains(&word_lc.as_str()))
    {
        return Ok(info);
    }
    let matches: Vec<&CommandInfo> = COMMANDS
        .iter()
        .filter(|c| !word_lc.is_empty() && c.name.starts_with(&word_lc))
        .collect();
    match matches.as_slice() {
        [one] => Ok(one),
        [] => Err(MetaError::Unknown(word.to_string())),
        many => Err(MetaError::Ambiguous {
            word: word.to_string(),
            candidates: many.iter().map(|c| c.name).collect(),
        }),
    }
}

/// Builds the command from its info and the argument text.
fn build(info: &'static CommandInfo, rest: &str) -> Result<MetaCommand, MetaError> {
    let no_argument = |cmd: MetaCommand| {
        if rest.is_empty() {
            Ok(cmd)
        } else {
            Err(MetaError::BadArgument {
                command: info.name,
                expected: "no argument",
                got: rest.to_string(),
            })
        }
    };
    match info.name {
        "help" => {
            if rest.split_whitespace().count() > 1 {
                return Err(MetaError::BadArgument {
                    command: "help",
                    expected: "at most one name",
                    got: rest.to_string(),
                });
            }
            Ok(MetaCommand::Help(
                (!rest.is_empty()).then(|| rest.to_string()),
            ))
        }
        "list" => match rest {
            "" => Ok(MetaCommand::List { all: false }),
            "all" => Ok(MetaCommand::List { all: true }),
            _ => Err(MetaError::BadArgument {
                command: "list",
                expected: "nothing or `all`",
                got: rest.to_string(),
            }),
        },
        "plugins" => no_argument(MetaCommand::Plugins),
        "reset" => no_argument(MetaCommand::Reset),
        _ => no_argument(MetaCommand::Quit),
    }
}

/// Names (with the colon) of the commands starting with `prefix`
/// (which includes the colon), for completion.
pub fn complete_name(prefix: &str) -> Vec<String> {
    let Some(word) = prefix.strip_prefix(PREFIX) else {
        return Vec::new();
    };
    COMMANDS
        .iter()
        .filter(|c| c.name.starts_with(word))
        .map(|c| format!("{PREFIX}{}", c.name))
        .collect()
}

/// The table of commands, one per line, for help text.
pub fn command_table() -> String {
    let rows: Vec<(String, &CommandInfo)> = COMMANDS
        .iter()
        .map(|c| {
            let head = if c.args.is_empty() {
                format!("{PREFIX}{}", c.name)
            } else {
                format!("{PREFIX}{} {}", c.name, c.args)
            };
            (head, c)
        })
        .collect();
    let width = rows.iter().map(|(h, _)| h.len()).max().unwrap_or(0);
    let mut out = String::new();
    for (head, c) in rows {
        out.push_str(&format!("  {head:width$}  {}", c.description));
        if !c.aliases.is_empty() {
            let aliases: Vec<String> = c.aliases.iter().map(|a| format!(":{a}")).collect();
            out.push_str(&format!(" (also {})", aliases.join(", ")));
        }
        out.push('\n');
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(s: &str) -> Option<Result<MetaCommand, MetaError>> {
        MetaCommand::parse(s)
    }

    #[test]
    fn lua_lines_are_not_meta() {
        for s in [
            "x = 1",
            "::top::",
            "  ::done::",
            ".5 * 2",
            "",
            ":",
            ": x",
            "print(':help')",
        ] {
            assert_eq!(parse(s), None, "{s:?}");
        }
    }

    #[test]
    fn full_names_aliases_and_prefixes() {
        assert_eq!(parse(":help"), Some(Ok(MetaCommand::Help(None))));
        assert_eq!(parse("  :h  "), Some(Ok(MetaCommand::Help(None))));
        assert_eq!(parse(":?"), Some(Ok(MetaCommand::Help(None))));
        assert_eq!(
            parse(":help string.format"),
            Some(Ok(MetaCommand::Help(Some("string.format".into()))))
        );
        assert_eq!(parse(":list"), Some(Ok(MetaCommand::List { all: false })));
        assert_eq!(parse(":ls all"), Some(Ok(MetaCommand::List { all: true })));
        assert_eq!(parse(":pl"), Some(Ok(MetaCommand::Plugins)));
        assert_eq!(parse(":RESET"), Some(Ok(MetaCommand::Reset)));
        assert_eq!(parse(":q"), Some(Ok(MetaCommand::Quit)));
        assert_eq!(parse(":exit"), Some(Ok(MetaCommand::Quit)));
    }

    #[test]
    fn malformed_commands_say_what_is_wrong() {
        let err = parse(":frobnicate").unwrap().unwrap_err();
        assert_eq!(err, MetaError::Unknown("frobnicate".into()));
        assert!(err.to_string().contains(":frobnicate"));

        let err = parse(":reset now").unwrap().unwrap_err();
        assert!(err.to_string().contains("no argument"), "{err}");
        assert!(err.to_string().contains("'now'"), "{err}");

        let err = parse(":list some").unwrap().unwrap_err();
        assert!(matches!(
            err,
            MetaError::BadArgument {
                command: "list",
                ..
            }
        ));

        let err = parse(":help a b").unwrap().unwrap_err();
        assert!(matches!(
            err,
            MetaError::BadArgument {
                command: "help",
                ..
            }
        ));
    }

    #[test]
    fn display_round_trips() {
        for cmd in [
            MetaCommand::Help(None),
            MetaCommand::Help(Some("math.sin".into())),
            MetaCommand::List { all: false },
            MetaCommand::List { all: true },
            MetaCommand::Plugins,
            MetaCommand::Reset,
            MetaCommand::Quit,
        ] {
            assert_eq!(parse(&cmd.to_string()), Some(Ok(cmd.clone())));
        }
    }

    #[test]
    fn completion_of_names() {
        assert_eq!(complete_name(":p"), vec![":plugins".to_string()]);
        assert_eq!(complete_name(":").len(), COMMANDS.len());
        assert!(complete_name("p").is_empty());
    }

    #[test]
    fn table_lists_every_command() {
        let t = command_table();
        for c in COMMANDS {
            assert!(t.contains(&format!(":{}", c.name)), "{t}");
        }
    }
}
