//! The rustyline helper of the interactive REPL: completion, validation
//! (multi-line input) and hints, each read from the live session so that
//! names defined a minute ago complete.
//!
//! Completion of Lua names is the host's ([`Host::completions`]); this
//! module adds meta-command names (`:he` → `:help`) and names after
//! `:help `. Validation asks the host whether the chunk is complete; a
//! chunk that is not makes Enter insert a new line instead of evaluating.
//!
//! [`Host::completions`]: crate::lua::Host::completions

use std::borrow::Cow;
use std::cell::RefCell;
use std::rc::Rc;

use rustyline::completion::Completer;
use rustyline::highlight::Highlighter;
use rustyline::hint::Hinter;
use rustyline::history::FileHistory;
use rustyline::validate::{ValidationContext, ValidationResult, Validator};
use rustyline::{CompletionType, Config, Context, Editor, Helper};

use super::meta::{self, MetaCommand};
use super::Session;
use crate::lua::Completeness;

/// History entries kept.
const HISTORY_SIZE: usize = 10_000;

/// Completion, hints and validation over a shared [`Session`].
pub struct ReplHelper {
    session: Rc<RefCell<Session>>,
    /// Dim hints; off when `NO_COLOR` is set.
    color: bool,
}

impl ReplHelper {
    /// A helper reading `session`.
    pub fn new(session: Rc<RefCell<Session>>) -> ReplHelper {
        let color = !matches!(std::env::var_os("NO_COLOR"), Some(v) if !v.is_empty());
        ReplHelper { session, color }
    }

    /// Completion candidates for `line` with the cursor at byte `pos`:
    /// (start of the replaced text, candidates).
    pub fn candidates(&self, line: &str, pos: usize) -> (usize, Vec<String>) {
        let pos = floor_char_boundary(line, pos);
        let head = &line[..pos];
        let indent = head.len() - head.trim_start().len();
        let trimmed = &head[indent..];
        if trimmed.starts_with(meta::PREFIX) && !trimmed.starts_with("::") {
            match trimmed.split_once(char::is_whitespace) {
                // Still typing the command word.
                None => return (indent, meta::complete_name(trimmed)),
                // After `:help `, complete a Lua name.
                Some((word, _))
                    if matches!(MetaCommand::parse(word), Some(Ok(MetaCommand::Help(_)))) => {}
                Some(_) => return (pos, Vec::new()),
            }
        }
        let Ok(session) = self.session.try_borrow() else {
            return (pos, Vec::new());
        };
        session.host().completions(line, pos)
    }
}

/// The largest char boundary of `s` not above `pos`.
fn floor_char_boundary(s: &str, pos: usize) -> usize {
    let mut p = pos.min(s.len());
    while !s.is_char_boundary(p) {
        p -= 1;
    }
    p
}

impl Completer for ReplHelper {
    type Candidate = String;

    fn complete(
        &self,
        line: &str,
        pos: usize,
        _ctx: &Context<'_>,
    ) -> rustyline::Result<(usize, Vec<String>)> {
        Ok(self.candidates(line, pos))
    }
}

impl Hinter for ReplHelper {
    type Hint = String;

    /// The rest of the name when exactly one completion fits, at least two
    /// characters are typed (one letter is too often the start of a
    /// keyword) and the cursor is at the end of the input.
    fn hint(&self, line: &str, pos: usize, _ctx: &Context<'_>) -> Option<String> {
        if pos < line.len() || line.trim().is_empty() {
            return None;
        }
        let (start, candidates) = self.candidates(line, pos);
        let [only] = candidates.as_slice() else {
            return None;
        };
        let typed = line.get(start..pos)?;
        if typed.chars().count() < 2 {
            return None;
        }
        only.strip_prefix(typed)
            .filter(|rest| !rest.is_empty())
            .map(str::to_string)
    }
}

impl Highlighter for ReplHelper {
    fn highlight_hint<'h>(&self, hint: &'h str) -> Cow<'h, str> {
        if self.color {
            Cow::Owned(format!("\x1b[2m{hint}\x1b[0m"))
        } else {
            Cow::Borrowed(hint)
        }
    }
}

impl Validator for ReplHelper {
    fn validate(&self, ctx: &mut ValidationContext<'_>) -> rustyline::Result<ValidationResult> {
        Ok(self.check(ctx.input()))
    }
}

impl ReplHelper {
    /// Whether Enter on `input` evaluates it (`Valid`) or starts a new line
    /// (`Incomplete`). Meta-commands and blank input are always whole.
    pub fn check(&self, input: &str) -> ValidationResult {
        if input.trim().is_empty() || meta::is_meta(input) {
            return ValidationResult::Valid(None);
        }
        match self.session.try_borrow() {
            Ok(s) if s.completeness(input) == Completeness::Incomplete => {
                ValidationResult::Incomplete
            }
            _ => ValidationResult::Valid(None),
        }
    }
}

impl Helper for ReplHelper {}

/// A line editor wired to `session`: list-style completion, history
/// without duplicates or blank-led entries, the REPL helper installed.
pub fn editor(session: Rc<RefCell<Session>>) -> rustyline::Result<Editor<ReplHelper, FileHistory>> {
    let config = Config::builder()
        .completion_type(CompletionType::List)
        .max_history_size(HISTORY_SIZE)?
        .history_ignore_dups(true)?
        .history_ignore_space(true)
        .auto_add_history(false)
        .build();
    let mut editor = Editor::with_config(config)?;
    editor.set_helper(Some(ReplHelper::new(session)));
    Ok(editor)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::lua::HostOptions;

    fn helper() -> ReplHelper {
        let s = Session::new(HostOptions::default(), true).unwrap();
        ReplHelper::new(Rc::new(RefCell::new(s)))
    }

    #[test]
    fn names_defined_in_the_session_complete() {
        let h = helper();
        assert!(!h
            .candidates("zz_rate", 7)
            .1
            .contains(&"zz_rate_of_cut".to_string()));
        h.session
            .borrow_mut()
            .eval("zz_rate_of_cut = 3", "=test")
            .unwrap();
        let (start, c) = h.candidates("x = zz_rate", 11);
        assert_eq!(start, 4);
        assert_eq!(c, vec!["zz_rate_of_cut".to_string()]);
    }

    #[test]
    fn meta_command_names_and_help_arguments_complete() {
        let h = helper();
        assert_eq!(h.candidates(":pl", 3), (0, vec![":plugins".to_string()]));
        assert_eq!(h.candidates("  :q", 4), (2, vec![":quit".to_string()]));
        let (start, c) = h.candidates(":help mat", 9);
        assert_eq!(start, 6);
        assert!(c.contains(&"math".to_string()), "{c:?}");
        assert!(h.candidates(":reset x", 8).1.is_empty());
    }

    #[test]
    fn hints_show_the_rest_of_a_unique_name() {
        let h = helper();
        h.session
            .borrow_mut()
            .eval("zz_unique_name = 1", "=test")
            .unwrap();
        let history = rustyline::history::DefaultHistory::new();
        let ctx = Context::new(&history);
        assert_eq!(h.hint("zz_uniq", 7, &ctx), Some("ue_name".to_string()));
        assert_eq!(h.hint("zz_unique_name", 14, &ctx), None);
        assert_eq!(h.hint("zz_uniq", 3, &ctx), None);
        h.session.borrow_mut().eval("q_only = 1", "=test").unwrap();
        assert_eq!(h.hint("q", 1, &ctx), None, "one letter is too little");
        assert_eq!(h.hint("q_", 2, &ctx), Some("only".to_string()));
    }

    #[test]
    fn validation_follows_completeness() {
        let h = helper();
        assert!(matches!(
            h.check("function f()"),
            ValidationResult::Incomplete
        ));
        assert!(matches!(
            h.check("function f()\n return 1\nend"),
            ValidationResult::Valid(None)
        ));
        assert!(matches!(h.check("x = = 1"), ValidationResult::Valid(None)));
        assert!(matches!(h.check(":help"), ValidationResult::Valid(None)));
        assert!(matches!(h.check("   "), ValidationResult::Valid(None)));
    }
}
