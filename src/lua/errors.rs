//! Turning mlua errors into what a user reads: one line `file:line: message`
//! (mlua's "runtime error:" / "callback error" wrapping stripped, the
//! location taken from the innermost Lua frame when the message has none),
//! and the full traceback kept apart for `--trace`.

use mlua::Error;

/// A user-facing error: one line, and the traceback when there is one.
#[derive(Debug, Clone, PartialEq)]
pub struct Described {
    /// `file:line: message` where a location is known.
    pub message: String,
    /// Lua's stack traceback (`stack traceback:` and frames).
    pub traceback: Option<String>,
}

/// Shorthand for a runtime error with a message (the Lua-visible error of
/// every meniscus function).
pub fn runtime(msg: impl std::fmt::Display) -> Error {
    Error::RuntimeError(msg.to_string())
}

/// Describes an mlua error for the user.
pub fn describe(e: &Error) -> Described {
    let mut traceback: Option<String> = None;
    let message = root_message(e, &mut traceback);
    let message = first_line(&message);
    let message = if has_location(&message) {
        message
    } else if let Some(loc) = traceback.as_deref().and_then(first_lua_frame) {
        format!("{loc}: {message}")
    } else {
        message
    };
    Described {
        message,
        traceback: traceback.map(|t| t.trim_end().to_string()),
    }
}

fn first_line(s: &str) -> String {
    s.lines().next().unwrap_or("").trim_end().to_string()
}

/// The innermost message, collecting the innermost traceback on the way
/// (the deepest callback saw the longest stack).
fn root_message(e: &Error, tb: &mut Option<String>) -> String {
    match e {
        Error::CallbackError { traceback, cause } => {
            if !traceback.trim().is_empty() && !traceback.starts_with('<') {
                *tb = Some(traceback.clone());
            }
            root_message(cause, tb)
        }
        Error::WithContext { context, cause } => {
            format!("{context}: {}", root_message(cause, tb))
        }
        Error::RuntimeError(s) => split_traceback(s, tb),
        Error::SyntaxError { message, .. } => split_traceback(message, tb),
        Error::MemoryError(_) => "not enough memory".to_string(),
        Error::BadArgument {
            to: Some(to),
            name: Some(name),
            ..
        } if name == "self" => {
            // `m.density{…}` instead of `m:density{…}`: mlua names the
            // method `Type.method`.
            let method = to.rsplit('.').next().unwrap_or(to);
            format!("{method}: call it as a method, with a colon: m:{method}(…)")
        }
        Error::BadArgument {
            to,
            pos,
            name,
            cause,
        } => {
            let what = match name {
                Some(n) => format!("bad argument '{n}'"),
                None => format!("bad argument #{pos}"),
            };
            let to = to
                .as_ref()
                .map(|t| format!(" to '{t}'"))
                .unwrap_or_default();
            format!("{what}{to}: {}", root_message(cause, tb))
        }
        Error::FromLuaConversionError { from, to, message } => match message {
            Some(m) => format!("expected {to}, got {from} ({m})"),
            None => format!("expected {to}, got {from}"),
        },
        Error::ExternalError(err) => err.to_string(),
        Error::SafetyError(m) => format!("not allowed: {m}"),
        other => other.to_string(),
    }
}

/// Splits a Lua error string from the traceback mlua's message handler
/// appends to it.
fn split_traceback(s: &str, tb: &mut Option<String>) -> String {
    match s.find("\nstack traceback:") {
        Some(i) => {
            if tb.is_none() {
                *tb = Some(s[i + 1..].to_string());
            }
            s[..i].to_string()
        }
        None => s.to_string(),
    }
}

/// Whether a message already starts with `something:123:`.
pub fn has_location(msg: &str) -> bool {
    let head = &msg[..msg.len().min(400)];
    let bytes = head.as_bytes();
    let mut i = 0;
    while let Some(p) = head[i..].find(':') {
        let colon = i + p;
        let digits = bytes[colon + 1..]
            .iter()
            .take_while(|b| b.is_ascii_digit())
            .count();
        if colon > 0 && digits > 0 && bytes.get(colon + 1 + digits) == Some(&b':') {
            return !head[..colon].contains(": ");
        }
        i = colon + 1;
    }
    false
}

/// The `file:line` of the first Lua frame in a traceback.
pub fn first_lua_frame(tb: &str) -> Option<String> {
    tb.lines().skip(1).find_map(|l| {
        let l = l.trim_start();
        // C frames and the sandbox's own wrappers are not where the user
        // should look.
        if l.starts_with("[C]")
            || l.starts_with("(...")
            || l.starts_with("(meniscus)")
            || l.starts_with("__mlua")
        {
            return None;
        }
        // "file:line: in …"
        let end = l.find(": in ")?;
        let loc = &l[..end];
        let (_, line) = loc.rsplit_once(':')?;
        line.parse::<u32>().ok()?;
        Some(loc.to_string())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn locations_are_recognised() {
        assert!(has_location("stdin:1: boom"));
        assert!(has_location(
            "scripts/x.lua:12: attempt to call a nil value"
        ));
        assert!(has_location("[string \"x\"]:3: oops"));
        assert!(!has_location("density: abv = 120 is outside 0 to 100"));
        assert!(!has_location("not enough memory"));
    }

    #[test]
    fn first_lua_frame_skips_c_frames() {
        let tb =
            "stack traceback:\n\t[C]: in method 'density'\n\tlab.lua:7: in main chunk\n\t[C]: in ?";
        assert_eq!(first_lua_frame(tb).as_deref(), Some("lab.lua:7"));
        assert_eq!(first_lua_frame("stack traceback:\n\t[C]: in ?"), None);
        let tb = "stack traceback:\n\t[C]: in ?\n\t(meniscus):2: in function 'pcall'\n\tx.lua:3: in main chunk";
        assert_eq!(first_lua_frame(tb).as_deref(), Some("x.lua:3"));
    }
}
