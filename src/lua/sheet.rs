//! The `sheet` namespace: a thin Lua binding over the kernel's sheet model
//! ([`crate::kernel::sheet`]). Rows count from 1 here and from 0 in the
//! kernel; the conversion happens only in this file.
//!
//! Formulas are Lua. An expression formula (`s:formula("rho",
//! "m:density{abv = abv, t = t}")`) is compiled once into a function whose
//! parameters are the columns the expression names (see
//! [`referenced_names`] for the rule), and runs in a read-only private
//! environment: other names are globals, read live but never written. A
//! function formula gets a table of its dependencies' values per row.
//! Whole-column work runs through [`Evaluator::eval_rows`], which looks the
//! function up once per chunk of rows.
//!
//! Sheet cells are Rust memory, which Lua's memory limit does not see:
//! every operation that adds cells is checked against the host's limit
//! first and the sheet's size is counted with the host's other Rust
//! allocations. Long builds show a progress bar on stderr when it is a
//! terminal.

use std::collections::HashMap;
use std::io::IsTerminal;
use std::rc::Rc;
use std::time::Duration;

use mlua::chunk::ChunkMode;
use mlua::{
    AnyUserData, Function, Lua, MetaMethod, MultiValue, Table, UserData, UserDataMethods,
    UserDataRefMut, Value as LuaValue,
};

use super::convert::{describe_value, numbers, Fields, Numbers};
use super::errors::{describe, runtime};
use super::files::resolve_path;
use super::help::{add_help, add_keys, tag};
use super::limits::{check_bytes, fmt_mib, Allocation};
use super::vector;
use crate::kernel::sheet::{
    CellRef, ColumnData, ColumnRef, ColumnSink, CsvOptions, EvalError, Evaluator, FormulaId, Grid,
    JsonLayout, RowView, RowsView, Sheet, Value,
};
use crate::kernel::Error as KernelError;

/// Most cells one sheet may hold, whatever the memory limit.
pub const MAX_CELLS: usize = 100_000_000;

/// Bytes counted per cell of a numeric column.
const NUMBER_CELL: usize = std::mem::size_of::<f64>();
/// Bytes counted per cell of a column holding texts or empty cells (the
/// text itself is not counted).
const VALUE_CELL: usize = std::mem::size_of::<Value>();

/// Whole-column work on at least this many cells gets a progress bar
/// (when stderr is a terminal).
const PROGRESS_MIN_CELLS: usize = 50_000;

/// What a formula column computes, as the binding holds it.
struct FormulaDef {
    /// The compiled function.
    func: Function,
    /// Expression formulas take the dependencies as arguments; function
    /// formulas take one table of them.
    positional: bool,
    /// The expression text, for `s:formulas()`.
    source: Option<String>,
    /// For expressions: the globals the expression reads, held in locals
    /// of the compiled chunk (a lookup through the read-only environment
    /// per row would cost more than the rest of a simple formula), and the
    /// function that sets them, called with their current values before
    /// each evaluation; so globals are read live, once per evaluation.
    globals: Option<(Vec<String>, Table, Function)>,
}

impl FormulaDef {
    /// Reads the globals the expression uses into its locals.
    fn refresh(&self) -> mlua::Result<()> {
        if let Some((names, env, set)) = &self.globals {
            let mut values = MultiValue::new();
            for n in names {
                values.push_back(env.get::<LuaValue>(n.as_str())?);
            }
            set.call::<()>(values)?;
        }
        Ok(())
    }
}

/// The Lua userdata of a sheet: the kernel sheet, the formulas its formula
/// columns refer to, and the memory it is counted for.
pub struct SheetUd {
    sheet: Sheet,
    formulas: HashMap<u64, Rc<FormulaDef>>,
    next_id: u64,
    alloc: Allocation,
}

impl SheetUd {
    fn new(lua: &Lua, sheet: Sheet) -> SheetUd {
        let alloc = Allocation::of_bytes(lua, sheet_bytes(&sheet));
        SheetUd {
            sheet,
            formulas: HashMap::new(),
            next_id: 1,
            alloc,
        }
    }

    /// The kernel sheet (for Rust code handed a sheet userdata).
    pub fn sheet(&self) -> &Sheet {
        &self.sheet
    }

    /// Re-counts the sheet's memory after a change.
    fn account(&mut self, lua: &Lua) {
        self.alloc = Allocation::of_bytes(lua, sheet_bytes(&self.sheet));
    }

    /// A new sheet userdata for `sheet`, a derivative of this one (filter):
    /// same formulas.
    fn derived(&self, lua: &Lua, sheet: Sheet) -> SheetUd {
        let mut ud = SheetUd::new(lua, sheet);
        ud.formulas = self.formulas.clone();
        ud.next_id = self.next_id;
        ud
    }

    /// Drops formulas no column refers to any more.
    fn prune(&mut self) {
        let live: Vec<u64> = self
            .sheet
            .column_names()
            .iter()
            .filter_map(|n| self.sheet.formula(n).ok().flatten().map(|f| f.id.0))
            .collect();
        self.formulas.retain(|id, _| live.contains(id));
    }
}

/// Rust memory a sheet is counted for: 8 bytes per cell of a numeric
/// column, the size of a cell value for other columns.
pub fn sheet_bytes(s: &Sheet) -> usize {
    (0..s.ncols())
        .filter_map(|c| s.column_at(c))
        .map(|(_, col)| match col {
            ColumnRef::Numbers(x) => x.len() * NUMBER_CELL,
            ColumnRef::Values(v) => v.len() * VALUE_CELL,
        })
        .sum()
}

/// Checks, before building, that a sheet of `nrows` × `ncols` cells
/// (`extra_bytes` of them new) may be held.
fn check_size(
    lua: &Lua,
    func: &str,
    nrows: usize,
    ncols: usize,
    extra_bytes: usize,
) -> mlua::Result<()> {
    let cells = nrows.saturating_mul(ncols);
    if cells > MAX_CELLS {
        return Err(runtime(format!(
            "{func}: a sheet of {nrows} rows × {ncols} columns ({cells} cells) is more than \
             the {MAX_CELLS} cells a sheet may hold"
        )));
    }
    check_bytes(lua, extra_bytes).map_err(|detail| {
        runtime(format!(
            "{func}: not enough memory for a sheet of {nrows} rows × {ncols} columns \
             ({} MiB more; {detail}); raise --memory-limit or build a smaller table",
            fmt_mib(extra_bytes)
        ))
    })
}

// ------------------------------------------------------------ values

/// A sheet cell as a Lua value: number, string or nil.
fn cell_to_lua(lua: &Lua, c: CellRef<'_>) -> mlua::Result<LuaValue> {
    Ok(match c {
        CellRef::Number(x) => LuaValue::Number(x),
        CellRef::Text(s) => LuaValue::String(lua.create_string(s)?),
        CellRef::Empty => LuaValue::Nil,
    })
}

/// A Lua value as a sheet cell; `what` names the place for the message.
fn lua_to_cell(v: &LuaValue, what: &dyn Fn() -> String) -> Result<Value, String> {
    match v {
        LuaValue::Nil => Ok(Value::Empty),
        LuaValue::Integer(i) => Ok(Value::Number(*i as f64)),
        LuaValue::Number(x) if x.is_finite() => Ok(Value::Number(*x)),
        LuaValue::Number(x) => Err(format!("{}: {x} is not a finite number", what())),
        LuaValue::String(s) => match s.to_str() {
            Ok(t) => Ok(Value::Text(t.to_string())),
            Err(_) => Err(format!("{}: the string is not valid UTF-8", what())),
        },
        other => Err(format!(
            "{}: a cell holds a number, a string or nil, got {}",
            what(),
            describe_value(other)
        )),
    }
}

/// A 1-based row argument as a 0-based index.
fn row_arg(v: &LuaValue, func: &str) -> mlua::Result<usize> {
    let i = match v {
        LuaValue::Integer(i) => *i,
        LuaValue::Number(x) if x.fract() == 0.0 && x.abs() < 9.0e15 => *x as i64,
        other => {
            return Err(runtime(format!(
                "{func}: row must be a whole number (rows count from 1), got {}",
                describe_value(other)
            )))
        }
    };
    if i < 1 {
        return Err(runtime(format!(
            "{func}: row {i} does not exist: rows count from 1"
        )));
    }
    Ok((i - 1) as usize)
}

fn string_arg(v: &LuaValue, func: &str, arg: &str) -> mlua::Result<String> {
    match v {
        LuaValue::String(s) => Ok(s.to_str()?.to_string()),
        other => Err(runtime(format!(
            "{func}: {arg} must be a string, got {}",
            describe_value(other)
        ))),
    }
}

/// Whether `t` holds exactly the indices 1..=`n`: a key that is not one of
/// them is the error `bad_key` makes of it; `false` means a hole.
fn keys_are_indices(
    t: &Table,
    n: usize,
    bad_key: impl Fn(&LuaValue) -> mlua::Error,
) -> mlua::Result<bool> {
    let mut count = 0usize;
    t.for_each::<LuaValue, LuaValue>(|k, _| {
        count += 1;
        match k {
            LuaValue::Integer(i) if i >= 1 && (i as usize) <= n => Ok(()),
            other => Err(bad_key(&other)),
        }
    })?;
    Ok(count == n)
}

/// A Lua array of strings (column names, dependencies).
fn string_list(v: &LuaValue, func: &str, arg: &str) -> mlua::Result<Vec<String>> {
    let LuaValue::Table(t) = v else {
        return Err(runtime(format!(
            "{func}: {arg} must be a table of names like {{\"abv\", \"t\"}}, got {}",
            describe_value(v)
        )));
    };
    let n = t.raw_len();
    let mut out = Vec::with_capacity(n);
    let whole = keys_are_indices(t, n, |k| {
        runtime(format!(
            "{func}: {arg} must be a list of names, but it has the key {}",
            describe_value(k)
        ))
    })?;
    if !whole {
        return Err(runtime(format!("{func}: {arg} has a hole")));
    }
    for i in 1..=n {
        let v: LuaValue = t.raw_get(i)?;
        out.push(string_arg(&v, func, &format!("{arg}[{i}]"))?);
    }
    Ok(out)
}

/// One value per row for a column, from a vector or a Lua array of numbers,
/// strings and `""` (empty).
fn column_data(lua: &Lua, v: &LuaValue, func: &str, name: &str) -> mlua::Result<ColumnData> {
    match v {
        LuaValue::UserData(ud) if ud.is::<vector::Vector>() => {
            let vec = ud.borrow::<vector::Vector>()?;
            Ok(ColumnData::Numbers(vec.as_slice().to_vec()))
        }
        LuaValue::Table(t) => {
            // Numbers only: the fast, checked path of the vector functions.
            if let Ok(Numbers::Many(xs)) = numbers(lua, v, func, name) {
                return Ok(ColumnData::Numbers(xs));
            }
            let n = t.raw_len();
            let whole = keys_are_indices(t, n, |k| {
                runtime(format!(
                    "{func}: the values for column \"{name}\" must be an array, but it has the key {}",
                    describe_value(k)
                ))
            })?;
            if !whole {
                return Err(runtime(format!(
                    "{func}: the values for column \"{name}\" have a hole (nil); write \"\" for an empty cell"
                )));
            }
            let mut cells = Vec::with_capacity(n);
            for i in 1..=n {
                let x: LuaValue = t.raw_get(i)?;
                cells.push(
                    lua_to_cell(&x, &|| format!("{func}: column \"{name}\", value [{i}]"))
                        .map_err(runtime)?,
                );
            }
            Ok(ColumnData::Values(cells))
        }
        other => Err(runtime(format!(
            "{func}: the values for column \"{name}\" must be a vector or an array, got {}",
            describe_value(other)
        ))),
    }
}

fn column_bytes(d: &ColumnData) -> usize {
    match d {
        ColumnData::Numbers(x) => x.len() * NUMBER_CELL,
        ColumnData::Values(v) => v.len() * VALUE_CELL,
    }
}

fn kernel_err(func: &str, e: KernelError) -> mlua::Error {
    runtime(format!("{func}: {e}"))
}

// ------------------------------------------------------------ progress

/// A progress bar on stderr for long whole-column work, shown only when
/// stderr is a terminal (never in pipes, files or CI logs).
struct Progress {
    label: &'static str,
    bar: Option<indicatif::ProgressBar>,
    /// Whether stderr is a terminal, asked only once work is large enough
    /// (a system call is too dear for every single-row change).
    terminal: Option<bool>,
}

impl Progress {
    fn new(label: &'static str) -> Progress {
        Progress {
            label,
            bar: None,
            terminal: None,
        }
    }

    fn update(&mut self, done: usize, total: usize) {
        if total < PROGRESS_MIN_CELLS
            || !*self
                .terminal
                .get_or_insert_with(|| std::io::stderr().is_terminal())
        {
            return;
        }
        let bar = self.bar.get_or_insert_with(|| {
            let bar = indicatif::ProgressBar::with_draw_target(
                Some(total as u64),
                indicatif::ProgressDrawTarget::stderr(),
            );
            if let Ok(style) = indicatif::ProgressStyle::with_template(
                "{msg} [{bar:30}] {pos}/{len} cells, {eta} left",
            ) {
                bar.set_style(style.progress_chars("=> "));
            }
            bar.set_message(self.label);
            bar.enable_steady_tick(Duration::from_millis(200));
            bar
        });
        bar.set_length(total as u64);
        bar.set_position(done as u64);
    }
}

impl Drop for Progress {
    fn drop(&mut self) {
        if let Some(bar) = self.bar.take() {
            bar.finish_and_clear();
        }
    }
}

// ------------------------------------------------------------ evaluation

/// Computes a sheet's formulas by calling their Lua functions.
struct LuaEval<'a> {
    lua: &'a Lua,
    formulas: &'a HashMap<u64, Rc<FormulaDef>>,
    progress: Progress,
    args: Vec<LuaValue>,
}

impl<'a> LuaEval<'a> {
    fn new(lua: &'a Lua, formulas: &'a HashMap<u64, Rc<FormulaDef>>, label: &'static str) -> Self {
        LuaEval {
            lua,
            formulas,
            progress: Progress::new(label),
            args: Vec::new(),
        }
    }

    fn def(&self, id: FormulaId) -> Result<Rc<FormulaDef>, String> {
        self.formulas
            .get(&id.0)
            .cloned()
            .ok_or_else(|| format!("formula {} is not defined in this sheet (a bug)", id.0))
    }

    fn one(&mut self, def: &FormulaDef, row: RowView<'_>) -> Result<Value, String> {
        let lua = self.lua;
        let result = if def.positional {
            self.args.clear();
            for k in 0..row.dep_count() {
                self.args
                    .push(cell_to_lua(lua, row.dep(k)).map_err(|e| describe(&e).message)?);
            }
            call_with(&def.func, &self.args)
        } else {
            let t = lua
                .create_table_with_capacity(0, row.dep_count())
                .map_err(|e| describe(&e).message)?;
            for k in 0..row.dep_count() {
                let v = cell_to_lua(lua, row.dep(k)).map_err(|e| describe(&e).message)?;
                t.raw_set(row.dep_name(k).unwrap_or_default(), v)
                    .map_err(|e| describe(&e).message)?;
            }
            def.func.call::<LuaValue>(t)
        };
        let v = result.map_err(|e| describe(&e).message)?;
        lua_to_cell(&v, &|| "the formula returned a bad value".to_string())
    }
}

/// Calls `f` with `args` spread out (tuples for the common short cases,
/// which mlua pushes without building a list).
fn call_with(f: &Function, args: &[LuaValue]) -> mlua::Result<LuaValue> {
    match args {
        [] => f.call(()),
        [a] => f.call(a.clone()),
        [a, b] => f.call((a.clone(), b.clone())),
        [a, b, c] => f.call((a.clone(), b.clone(), c.clone())),
        [a, b, c, d] => f.call((a.clone(), b.clone(), c.clone(), d.clone())),
        _ => f.call(MultiValue::from_iter(args.iter().cloned())),
    }
}

impl Evaluator for LuaEval<'_> {
    fn eval_row(&mut self, formula: FormulaId, row: RowView<'_>) -> Result<Value, String> {
        let def = self.def(formula)?;
        def.refresh().map_err(|e| describe(&e).message)?;
        self.one(&def, row)
    }

    fn eval_rows(
        &mut self,
        formula: FormulaId,
        rows: RowsView<'_>,
        out: &mut ColumnSink,
    ) -> Result<(), EvalError> {
        let start = rows.range().start;
        let def = self.def(formula).map_err(|message| EvalError {
            row: start,
            message,
        })?;
        def.refresh().map_err(|e| EvalError {
            row: start,
            message: describe(&e).message,
        })?;
        for row in rows.iter() {
            match self.one(&def, row) {
                Ok(Value::Number(x)) => out.push_number(x),
                Ok(v) => out.push(v),
                Err(message) => {
                    return Err(EvalError {
                        row: row.index(),
                        message,
                    })
                }
            }
        }
        Ok(())
    }

    fn on_progress(&mut self, done: usize, total: usize) {
        self.progress.update(done, total);
    }
}

// ------------------------------------------------------------ expressions

const LUA_KEYWORDS: [&str; 22] = [
    "and", "break", "do", "else", "elseif", "end", "false", "for", "function", "goto", "if", "in",
    "local", "nil", "not", "or", "repeat", "return", "then", "true", "until", "while",
];

/// The free names of a Lua expression, in order of first appearance: every
/// identifier except keywords, field and method names (after `.` or `:`),
/// keys of table constructors (a name followed by a single `=`), and
/// anything inside strings and comments.
///
/// An expression formula's dependencies are the free names that are
/// columns of the sheet; the others are globals. Names bound inside the
/// expression (parameters of an inline `function`) are not told apart:
/// use a function formula for such code.
pub fn referenced_names(expr: &str) -> Vec<String> {
    let b = expr.as_bytes();
    let mut out: Vec<String> = Vec::new();
    let mut i = 0;
    let is_start = |c: u8| c.is_ascii_alphabetic() || c == b'_';
    let is_word = |c: u8| c.is_ascii_alphanumeric() || c == b'_';
    // The previous significant byte (not whitespace), for `.name`/`:name`.
    let mut prev: u8 = 0;
    let mut prev2: u8 = 0;
    while i < b.len() {
        let c = b[i];
        if c.is_ascii_whitespace() {
            i += 1;
            continue;
        }
        // Comments.
        if c == b'-' && b.get(i + 1) == Some(&b'-') {
            i += 2;
            if let Some(level) = long_bracket_level(b, i) {
                i = skip_long_bracket(b, i, level);
            } else {
                while i < b.len() && b[i] != b'\n' {
                    i += 1;
                }
            }
            continue;
        }
        // Strings.
        if c == b'"' || c == b'\'' {
            i += 1;
            while i < b.len() && b[i] != c {
                if b[i] == b'\\' {
                    i += 1;
                }
                i += 1;
            }
            i += 1;
            prev2 = prev;
            prev = b'"';
            continue;
        }
        if c == b'[' {
            if let Some(level) = long_bracket_level(b, i) {
                i = skip_long_bracket(b, i, level);
                prev2 = prev;
                prev = b'"';
                continue;
            }
        }
        // Numbers (including hex, exponents and their signs).
        if c.is_ascii_digit() || (c == b'.' && b.get(i + 1).is_some_and(u8::is_ascii_digit)) {
            while i < b.len() {
                let d = b[i];
                let exponent_sign =
                    (d == b'+' || d == b'-') && matches!(b[i - 1], b'e' | b'E' | b'p' | b'P');
                if is_word(d) || d == b'.' || exponent_sign {
                    i += 1;
                } else {
                    break;
                }
            }
            prev2 = prev;
            prev = b'0';
            continue;
        }
        if is_start(c) {
            let start = i;
            while i < b.len() && is_word(b[i]) {
                i += 1;
            }
            let word = &expr[start..i];
            let after_member = (prev == b'.' && prev2 != b'.') || prev == b':';
            let mut j = i;
            while j < b.len() && b[j].is_ascii_whitespace() {
                j += 1;
            }
            let is_key = b.get(j) == Some(&b'=') && b.get(j + 1) != Some(&b'=');
            if !after_member
                && !is_key
                && !LUA_KEYWORDS.contains(&word)
                && !out.iter().any(|w| w == word)
            {
                out.push(word.to_string());
            }
            prev2 = prev;
            prev = b'a';
            continue;
        }
        prev2 = prev;
        prev = c;
        i += 1;
    }
    out
}

/// At `[` followed by `=`* and `[`: the number of `=`.
fn long_bracket_level(b: &[u8], i: usize) -> Option<usize> {
    if b.get(i) != Some(&b'[') {
        return None;
    }
    let mut j = i + 1;
    while b.get(j) == Some(&b'=') {
        j += 1;
    }
    (b.get(j) == Some(&b'[')).then_some(j - i - 1)
}

/// Skips a long bracket `[==[ … ]==]` starting at `i`; returns the index
/// after it (or the end of the input).
fn skip_long_bracket(b: &[u8], i: usize, level: usize) -> usize {
    let mut close = vec![b']'];
    close.extend(std::iter::repeat(b'=').take(level));
    close.push(b']');
    let body = i + level + 2;
    match b[body.min(b.len())..]
        .windows(close.len())
        .position(|w| w == close.as_slice())
    {
        Some(p) => body + p + close.len(),
        None => b.len(),
    }
}

/// Compiles an expression formula: checks that it is one expression,
/// finds its dependencies, and builds `function(<deps>) return (<expr>) end`
/// in a read-only private environment.
fn compile_expression(
    lua: &Lua,
    sheet: &Sheet,
    column: &str,
    expr: &str,
) -> mlua::Result<(FormulaDef, Vec<String>)> {
    let func = "s:formula";
    let chunk_name = format!("=formula \"{column}\"");
    // One expression, nothing after it: `return (<expr>\n)` only parses
    // then (the newline keeps a trailing comment from eating the bracket).
    lua.load(format!("return ({expr}\n)"))
        .set_name(&chunk_name)
        .set_mode(ChunkMode::Text)
        .into_function()
        .map_err(|e| {
            runtime(format!(
                "{func}: the expression for \"{column}\" is not one Lua expression: {}",
                describe(&e).message
            ))
        })?;
    let names = referenced_names(expr);
    let globals = lua.globals();
    let mut deps = Vec::new();
    let mut used_globals = Vec::new();
    for n in names {
        // The column's own name counts, so that a formula using itself is
        // refused as a cycle rather than as an unknown name.
        if sheet.has_column(&n) || n == column {
            deps.push(n);
        } else if globals.raw_get::<LuaValue>(n.as_str())?.is_nil() && n != "_G" && n != "load" {
            return Err(runtime(format!(
                "{func}: the expression for \"{column}\" uses '{n}', which is neither a column \
                 ({}) nor a global; a local variable is not visible in an expression formula \
                 (make it global, or pass a function: s:formula(name, function(row) … end))",
                sheet
                    .column_names()
                    .iter()
                    .map(|c| format!("\"{c}\""))
                    .collect::<Vec<_>>()
                    .join(", ")
            )));
        } else {
            used_globals.push(n);
        }
    }
    let params = deps.join(", ");
    let env = super::readonly::private_env(lua, true)?;
    // The expression stays on line 1, so that messages cite formula:1.
    let (locals, setter) = if used_globals.is_empty() {
        (String::new(), "function() end".to_string())
    } else {
        let list = used_globals.join(", ");
        (
            format!("local {list}; "),
            format!("function(...) {list} = ... end"),
        )
    };
    let maker = lua
        .load(format!(
            "{locals}return function({params}) return ({expr}\n) end, {setter}"
        ))
        .set_name(&chunk_name)
        .set_mode(ChunkMode::Text)
        .set_environment(env.clone())
        .into_function()?;
    let (f, set): (Function, Function) = maker.call(())?;
    let def = FormulaDef {
        func: f,
        positional: true,
        source: Some(expr.to_string()),
        globals: (!used_globals.is_empty()).then_some((used_globals, env, set)),
    };
    Ok((def, deps))
}

// ------------------------------------------------------------ the userdata

fn borrow_mut(ud: &AnyUserData, func: &str) -> mlua::Result<UserDataRefMut<SheetUd>> {
    ud.borrow_mut::<SheetUd>().map_err(|e| match e {
        mlua::Error::UserDataBorrowMutError | mlua::Error::UserDataBorrowError => runtime(format!(
            "{func}: this sheet is busy: a formula, filter or table function may not use the \
             sheet that is being computed"
        )),
        other => other,
    })
}

fn borrow(ud: &AnyUserData, func: &str) -> mlua::Result<mlua::UserDataRef<SheetUd>> {
    ud.borrow::<SheetUd>().map_err(|e| match e {
        mlua::Error::UserDataBorrowMutError | mlua::Error::UserDataBorrowError => runtime(format!(
            "{func}: this sheet is busy: a formula, filter or table function may not use the \
             sheet that is being computed"
        )),
        other => other,
    })
}

/// A copy of the kernel sheet behind a sheet userdata, for Rust code
/// that takes a sheet as data (`mixture.fit{data = s}`): refused while the
/// sheet is being computed, and counted against the memory limit before
/// it is made (it lives only as long as the caller's work).
pub fn snapshot(lua: &Lua, ud: &AnyUserData, func: &str) -> mlua::Result<Sheet> {
    let this = borrow(ud, func)?;
    let bytes = sheet_bytes(&this.sheet);
    check_bytes(lua, bytes).map_err(|detail| {
        runtime(format!(
            "{func}: not enough memory to read the sheet ({} MiB; {detail})",
            fmt_mib(bytes)
        ))
    })?;
    Ok(this.sheet.clone())
}

/// A whole row as a Lua table (empty cells absent).
fn row_table(lua: &Lua, row: RowView<'_>) -> mlua::Result<Table> {
    let t = lua.create_table()?;
    for (c, name) in row.column_names().enumerate() {
        let v = cell_to_lua(lua, row.cell(c))?;
        if !v.is_nil() {
            t.raw_set(name, v)?;
        }
    }
    Ok(t)
}

fn add_row(lua: &Lua, this: &mut SheetUd, arg: &LuaValue) -> mlua::Result<()> {
    let func = "s:add";
    let LuaValue::Table(t) = arg else {
        return Err(runtime(format!(
            "{func}: expected a row like {{abv = 40, t = 20}}, got {}",
            describe_value(arg)
        )));
    };
    let ncols = this.sheet.ncols();
    check_size(lua, func, this.sheet.nrows() + 1, ncols, ncols * VALUE_CELL)?;
    let mut named: Vec<(String, Value)> = Vec::new();
    let mut positional: Vec<(i64, Value)> = Vec::new();
    t.for_each::<LuaValue, LuaValue>(|k, v| {
        match k {
            LuaValue::String(s) => {
                let name = s.to_str()?.to_string();
                let cell =
                    lua_to_cell(&v, &|| format!("{func}: column \"{name}\"")).map_err(runtime)?;
                named.push((name, cell));
            }
            LuaValue::Integer(i) => {
                let cell = lua_to_cell(&v, &|| format!("{func}: value [{i}]")).map_err(runtime)?;
                positional.push((i, cell));
            }
            other => {
                return Err(runtime(format!(
                    "{func}: row keys must be column names, got {}",
                    describe_value(&other)
                )))
            }
        }
        Ok(())
    })?;
    let mut ev = LuaEval::new(lua, &this.formulas, "adding a row");
    let r = match (named.is_empty(), positional.is_empty()) {
        (false, false) => {
            return Err(runtime(format!(
                "{func}: give the row either by name {{abv = 40, t = 20}} or in column order \
                 {{40, 20}}, not both"
            )))
        }
        (_, true) => this.sheet.add_row_named(named, &mut ev),
        (true, false) => {
            positional.sort_by_key(|(i, _)| *i);
            if positional
                .iter()
                .enumerate()
                .any(|(j, (i, _))| *i != j as i64 + 1)
            {
                return Err(runtime(format!(
                    "{func}: a row in column order must be a list {{v1, v2, …}} without holes \
                     (write \"\" for an empty cell)"
                )));
            }
            this.sheet
                .add_row(positional.into_iter().map(|(_, v)| v).collect(), &mut ev)
        }
    };
    drop(ev);
    r.map_err(|e| kernel_err(func, e))?;
    this.account(lua);
    Ok(())
}

fn define_formula(
    lua: &Lua,
    this: &mut SheetUd,
    name: &str,
    what: &LuaValue,
    deps: Option<&LuaValue>,
) -> mlua::Result<()> {
    let func = "s:formula";
    let (def, deps) = match what {
        LuaValue::String(s) => {
            if deps.is_some_and(|d| !d.is_nil()) {
                return Err(runtime(format!(
                    "{func}: an expression formula finds its own dependencies (the column names \
                     it uses); a dependency list goes only with a function"
                )));
            }
            let expr = s.to_str()?.to_string();
            compile_expression(lua, &this.sheet, name, &expr)?
        }
        LuaValue::Function(f) => {
            let deps = match deps {
                None | Some(LuaValue::Nil) => this
                    .sheet
                    .column_names()
                    .into_iter()
                    .filter(|n| *n != name)
                    .filter(|n| matches!(this.sheet.formula(n), Ok(None)))
                    .map(str::to_string)
                    .collect(),
                Some(d) => string_list(d, func, "deps")?,
            };
            (
                FormulaDef {
                    func: f.clone(),
                    positional: false,
                    source: None,
                    globals: None,
                },
                deps,
            )
        }
        other => {
            return Err(runtime(format!(
            "{func}: the formula must be a Lua expression (a string) or a function(row), got {}",
            describe_value(other)
        )))
        }
    };
    let new_col = !this.sheet.has_column(name);
    let nrows = this.sheet.nrows();
    check_size(
        lua,
        func,
        nrows,
        this.sheet.ncols() + usize::from(new_col),
        nrows * NUMBER_CELL,
    )?;
    let id = this.next_id;
    this.next_id += 1;
    this.formulas.insert(id, Rc::new(def));
    let result = {
        let mut ev = LuaEval::new(lua, &this.formulas, "computing a formula");
        this.sheet.add_formula(name, &deps, FormulaId(id), &mut ev)
    };
    if let Err(e) = result {
        this.formulas.remove(&id);
        return Err(kernel_err(func, e));
    }
    this.prune();
    this.account(lua);
    Ok(())
}

fn set_column(lua: &Lua, this: &mut SheetUd, name: &str, values: &LuaValue) -> mlua::Result<()> {
    let func = "s:set_column";
    let data = column_data(lua, values, func, name)?;
    let exists = this.sheet.has_column(name);
    let nrows = if this.sheet.ncols() == 0 {
        data.len()
    } else {
        this.sheet.nrows()
    };
    check_size(
        lua,
        func,
        nrows,
        this.sheet.ncols() + usize::from(!exists),
        column_bytes(&data),
    )?;
    let r = if exists {
        let mut ev = LuaEval::new(lua, &this.formulas, "recalculating");
        this.sheet.set_column(name, data, &mut ev)
    } else {
        this.sheet.add_column(name, data)
    };
    r.map_err(|e| kernel_err(func, e))?;
    this.account(lua);
    Ok(())
}

fn csv_options(lua: &Lua, v: Option<&LuaValue>, func: &str) -> mlua::Result<CsvOptions> {
    let mut o = CsvOptions::default();
    let Some(v) = v.filter(|v| !v.is_nil()) else {
        return Ok(o);
    };
    let f = Fields::read(
        lua,
        v,
        func,
        &["delimiter", "empty_numbers"],
        "{delimiter = \";\"}",
    )?;
    if let Some(d) = f.get("delimiter")?.as_ref() {
        let d = string_arg(d, func, "delimiter")?;
        match d.as_bytes() {
            [b] if b.is_ascii() && *b != b'"' && *b != b'\n' && *b != b'\r' => o.delimiter = *b,
            _ => {
                return Err(runtime(format!(
                    "{func}: delimiter must be one ASCII character other than a quote or a line \
                     break, got \"{d}\""
                )))
            }
        }
    }
    if let Some(b) = f.opt_bool("empty_numbers")? {
        o.allow_empty_numbers = b;
    }
    Ok(o)
}

fn write_file(
    lua: &Lua,
    sheet: &Sheet,
    path: &LuaValue,
    func: &str,
    write: impl FnOnce(&Sheet, &mut dyn std::io::Write) -> crate::kernel::Result<()>,
) -> mlua::Result<()> {
    let p = string_arg(path, func, "path")?;
    let target = resolve_path(lua, &p, true)
        .map_err(|e| runtime(format!("{func}: {}", describe(&e).message)))?;
    crate::io::write_atomically(&target, |w| write(sheet, w))
        .map_err(|e| runtime(format!("{func}: cannot write '{p}': {e}")))
}

impl UserData for SheetUd {
    fn add_methods<M: UserDataMethods<Self>>(methods: &mut M) {
        methods.add_function("add", |lua, (ud, row): (AnyUserData, LuaValue)| {
            let mut this = borrow_mut(&ud, "s:add")?;
            add_row(lua, &mut this, &row)?;
            drop(this);
            Ok(ud)
        });
        methods.add_function(
            "set",
            |lua, (ud, row, col, v): (AnyUserData, LuaValue, LuaValue, LuaValue)| {
                let func = "s:set";
                let r = row_arg(&row, func)?;
                let col = string_arg(&col, func, "column")?;
                let value =
                    lua_to_cell(&v, &|| format!("{func}: column \"{col}\"")).map_err(runtime)?;
                let mut this = borrow_mut(&ud, func)?;
                let this = &mut *this;
                let mut ev = LuaEval::new(lua, &this.formulas, "recalculating");
                this.sheet
                    .set(r, &col, value, &mut ev)
                    .map_err(|e| kernel_err(func, e))?;
                drop(ev);
                this.account(lua);
                Ok(())
            },
        );
        methods.add_function(
            "get",
            |lua, (ud, row, col): (AnyUserData, LuaValue, LuaValue)| {
                let func = "s:get";
                let r = row_arg(&row, func)?;
                let col = string_arg(&col, func, "column")?;
                let this = borrow(&ud, func)?;
                let c = this.sheet.get(r, &col).map_err(|e| kernel_err(func, e))?;
                cell_to_lua(lua, c)
            },
        );
        methods.add_function(
            "set_column",
            |lua, (ud, name, values): (AnyUserData, LuaValue, LuaValue)| {
                let name = string_arg(&name, "s:set_column", "name")?;
                let mut this = borrow_mut(&ud, "s:set_column")?;
                set_column(lua, &mut this, &name, &values)?;
                drop(this);
                Ok(ud)
            },
        );
        methods.add_function(
            "formula",
            |lua, (ud, name, what, deps): (AnyUserData, LuaValue, LuaValue, Option<LuaValue>)| {
                let name = string_arg(&name, "s:formula", "name")?;
                let mut this = borrow_mut(&ud, "s:formula")?;
                define_formula(lua, &mut this, &name, &what, deps.as_ref())?;
                drop(this);
                Ok(ud)
            },
        );
        methods.add_function("recalculate", |lua, ud: AnyUserData| {
            let func = "s:recalculate";
            {
                let mut this = borrow_mut(&ud, func)?;
                let this = &mut *this;
                let mut ev = LuaEval::new(lua, &this.formulas, "recalculating");
                this.sheet
                    .recalculate(&mut ev)
                    .map_err(|e| kernel_err(func, e))?;
                drop(ev);
                this.account(lua);
            }
            Ok(ud)
        });
        methods.add_function("column", |lua, (ud, name): (AnyUserData, LuaValue)| {
            let func = "s:column";
            let name = string_arg(&name, func, "name")?;
            let this = borrow(&ud, func)?;
            match this.sheet.column(&name).map_err(|e| kernel_err(func, e))? {
                ColumnRef::Numbers(xs) => Ok(LuaValue::UserData(vector::create(lua, xs.to_vec())?)),
                ColumnRef::Values(vs) => {
                    let t = lua.create_table_with_capacity(vs.len(), 0)?;
                    for (i, v) in vs.iter().enumerate() {
                        let x = cell_to_lua(lua, v.as_cell())?;
                        if !x.is_nil() {
                            t.raw_set(i + 1, x)?;
                        }
                    }
                    Ok(LuaValue::Table(t))
                }
            }
        });
        methods.add_function("row", |lua, (ud, row): (AnyUserData, LuaValue)| {
            let func = "s:row";
            let r = row_arg(&row, func)?;
            let this = borrow(&ud, func)?;
            let view = this.sheet.row(r).map_err(|e| kernel_err(func, e))?;
            row_table(lua, view)
        });
        methods.add_function("nrows", |_, ud: AnyUserData| {
            Ok(borrow(&ud, "s:nrows")?.sheet.nrows())
        });
        methods.add_function("ncols", |_, ud: AnyUserData| {
            Ok(borrow(&ud, "s:ncols")?.sheet.ncols())
        });
        methods.add_function("names", |lua, ud: AnyUserData| {
            let this = borrow(&ud, "s:names")?;
            lua.create_sequence_from(this.sheet.column_names())
        });
        methods.add_function("formulas", |lua, ud: AnyUserData| {
            let this = borrow(&ud, "s:formulas")?;
            let t = lua.create_table()?;
            for name in this.sheet.column_names() {
                if let Ok(Some(info)) = this.sheet.formula(name) {
                    let text = match this.formulas.get(&info.id.0).and_then(|d| d.source.clone()) {
                        Some(src) => src,
                        None => format!("function(row) of {}", info.deps.join(", ")),
                    };
                    t.raw_set(name, text)?;
                }
            }
            Ok(t)
        });
        methods.add_function("filter", |lua, (ud, keep): (AnyUserData, LuaValue)| {
            let func = "s:filter";
            let LuaValue::Function(keep) = keep else {
                return Err(runtime(format!(
                    "{func}: expected a function(row) returning true for the rows to keep, got {}",
                    describe_value(&keep)
                )));
            };
            let this = borrow(&ud, func)?;
            let filtered = this
                .sheet
                .filter(|row| {
                    let t = row_table(lua, row).map_err(|e| describe(&e).message)?;
                    let v: LuaValue = keep.call(t).map_err(|e| describe(&e).message)?;
                    Ok(!matches!(v, LuaValue::Nil | LuaValue::Boolean(false)))
                })
                .map_err(|e| kernel_err(func, e))?;
            let new = this.derived(lua, filtered);
            drop(this);
            lua.create_userdata(new)
        });
        methods.add_function(
            "sort",
            |_, (ud, col, dir): (AnyUserData, LuaValue, Option<LuaValue>)| {
                let func = "s:sort";
                let col = string_arg(&col, func, "column")?;
                let ascending = match dir {
                    None | Some(LuaValue::Nil) => true,
                    Some(LuaValue::String(s)) if s.as_bytes().as_ref() == b"asc" => true,
                    Some(LuaValue::String(s)) if s.as_bytes().as_ref() == b"desc" => false,
                    Some(other) => {
                        return Err(runtime(format!(
                            "{func}: the direction must be \"asc\" or \"desc\", got {}",
                            describe_value(&other)
                        )))
                    }
                };
                borrow_mut(&ud, func)?
                    .sheet
                    .sort(&col, ascending)
                    .map_err(|e| kernel_err(func, e))?;
                Ok(ud)
            },
        );
        methods.add_function(
            "write_csv",
            |lua, (ud, path, opts): (AnyUserData, LuaValue, Option<LuaValue>)| {
                let func = "s:write_csv";
                let o = csv_options(lua, opts.as_ref(), func)?;
                let this = borrow(&ud, func)?;
                write_file(lua, &this.sheet, &path, func, |s, w| s.write_csv(w, &o))
            },
        );
        methods.add_function(
            "write_json",
            |lua, (ud, path, opts): (AnyUserData, LuaValue, Option<LuaValue>)| {
                let func = "s:write_json";
                let layout = match opts.as_ref().filter(|v| !v.is_nil()) {
                    None => JsonLayout::Rows,
                    Some(v) => {
                        let f = Fields::read(lua, v, func, &["layout"], "{layout = \"columns\"}")?;
                        match f.get("layout")?.as_ref() {
                            None => JsonLayout::Rows,
                            Some(LuaValue::String(s)) if s.as_bytes().as_ref() == b"rows" => {
                                JsonLayout::Rows
                            }
                            Some(LuaValue::String(s)) if s.as_bytes().as_ref() == b"columns" => {
                                JsonLayout::Columns
                            }
                            Some(other) => {
                                return Err(runtime(format!(
                                    "{func}: layout must be \"rows\" or \"columns\", got {}",
                                    describe_value(other)
                                )))
                            }
                        }
                    }
                };
                let this = borrow(&ud, func)?;
                write_file(lua, &this.sheet, &path, func, |s, w| {
                    s.write_json(w, layout)
                })
            },
        );
        methods.add_meta_function(MetaMethod::Len, |_, ud: AnyUserData| {
            Ok(borrow(&ud, "#s")?.sheet.nrows())
        });
        methods.add_meta_function(MetaMethod::ToString, |_, ud: AnyUserData| {
            let this = borrow(&ud, "tostring")?;
            let s = &this.sheet;
            Ok(format!(
                "sheet: {} rows × {} columns\n{}",
                s.nrows(),
                s.ncols(),
                s.to_string().trim_end()
            ))
        });
    }
}

/// Method names, for help and completion.
pub const METHODS: [&str; 16] = [
    "add",
    "set",
    "get",
    "set_column",
    "formula",
    "formulas",
    "recalculate",
    "column",
    "row",
    "nrows",
    "ncols",
    "names",
    "filter",
    "sort",
    "write_csv",
    "write_json",
];

// ------------------------------------------------------------ namespace

fn sheet_new(lua: &Lua, names: Option<LuaValue>) -> mlua::Result<AnyUserData> {
    let func = "sheet.new";
    let names = match names {
        None | Some(LuaValue::Nil) => Vec::new(),
        Some(v) => string_list(&v, func, "names")?,
    };
    let s = Sheet::new(&names).map_err(|e| kernel_err(func, e))?;
    lua.create_userdata(SheetUd::new(lua, s))
}

fn read_csv(lua: &Lua, (path, opts): (LuaValue, Option<LuaValue>)) -> mlua::Result<AnyUserData> {
    let func = "sheet.read_csv";
    let p = string_arg(&path, func, "path")?;
    let o = csv_options(lua, opts.as_ref(), func)?;
    let full = resolve_path(lua, &p, false)
        .map_err(|e| runtime(format!("{func}: {}", describe(&e).message)))?;
    let file = std::fs::File::open(&full)
        .map_err(|e| runtime(format!("{func}: cannot read '{p}': {e}")))?;
    let len = file.metadata().map(|m| m.len()).unwrap_or(0);
    // Cells take more memory than their text: keep the file well inside the limit.
    let max = lua
        .app_data_ref::<super::files::FileRoots>()
        .map(|r| r.max_read / 8)
        .unwrap_or(u64::MAX);
    if len > max {
        return Err(runtime(format!(
            "{func}: '{p}' is {} MiB, more than a CSV file may be under the memory limit \
             ({} MiB: an eighth of it); raise --memory-limit",
            fmt_mib(len as usize),
            fmt_mib(max as usize)
        )));
    }
    let sheet = match Sheet::read_csv(std::io::BufReader::new(file), &o) {
        Ok(s) => s,
        Err(KernelError::Csv {
            line,
            column,
            message,
        }) => {
            let col = column.map(|c| format!(", column {c}")).unwrap_or_default();
            return Err(runtime(format!("{func}: {p} line {line}{col}: {message}")));
        }
        Err(e) => return Err(runtime(format!("{func}: {p}: {e}"))),
    };
    let bytes = sheet_bytes(&sheet);
    check_size(lua, func, sheet.nrows(), sheet.ncols(), bytes)?;
    lua.create_userdata(SheetUd::new(lua, sheet))
}

/// One axis of `sheet.grid`: `{name = "abv", values = …}`.
fn grid_axis(
    lua: &Lua,
    v: Option<&LuaValue>,
    func: &str,
    key: &str,
) -> mlua::Result<(String, Vec<f64>)> {
    let Some(v) = v else {
        return Err(runtime(format!(
            "{func}: {key} is required, like {key} = {{name = \"abv\", values = range(0, 100, 10)}}"
        )));
    };
    let func_key = format!("{func} {key}");
    let f = Fields::read(
        lua,
        v,
        &func_key,
        &["name", "values"],
        "{name = \"abv\", values = range(0, 100, 10)}",
    )?;
    let name = match f.get("name")?.as_ref() {
        Some(n) => string_arg(n, func, &format!("{key}.name"))?,
        None => return Err(runtime(format!("{func}: {key}.name is required"))),
    };
    let values = match f.get("values")?.as_ref() {
        Some(x) => match numbers(lua, x, func, &format!("{key}.values"))? {
            Numbers::Many(v) => v,
            Numbers::One(x) => vec![x],
        },
        None => return Err(runtime(format!("{func}: {key}.values is required"))),
    };
    Ok((name, values))
}

fn grid(lua: &Lua, arg: LuaValue) -> mlua::Result<AnyUserData> {
    let func = "sheet.grid";
    let f = Fields::read(
        lua,
        &arg,
        func,
        GRID_KEYS,
        "{rows = {name = \"abv\", values = …}, cols = {name = \"t\", values = …}, fn = function(abv, t) … end}",
    )?;
    let (row_name, row_values) = grid_axis(lua, f.get("rows")?.as_ref(), func, "rows")?;
    let (col_name, col_values) = grid_axis(lua, f.get("cols")?.as_ref(), func, "cols")?;
    let value_fn = match f.get("fn")?.as_ref() {
        Some(LuaValue::Function(g)) => g.clone(),
        Some(other) => {
            return Err(runtime(format!(
                "{func}: fn must be a function(row value, column value), got {}",
                describe_value(other)
            )))
        }
        None => return Err(runtime(format!("{func}: fn is required"))),
    };
    let wide = match f.get("layout")?.as_ref() {
        None => false,
        Some(LuaValue::String(s)) if s.as_bytes().as_ref() == b"long" => false,
        Some(LuaValue::String(s)) if s.as_bytes().as_ref() == b"wide" => true,
        Some(other) => {
            return Err(runtime(format!(
                "{func}: layout must be \"long\" or \"wide\", got {}",
                describe_value(other)
            )))
        }
    };
    let value_name = match f.get("value")?.as_ref() {
        None => "value".to_string(),
        Some(v) if !wide => string_arg(v, func, "value")?,
        Some(_) => {
            return Err(runtime(format!(
                "{func}: value names the value column of the long layout; the wide layout \
                 names its columns after the column values"
            )))
        }
    };
    let g = Grid {
        row_name: &row_name,
        row_values: &row_values,
        col_name: &col_name,
        col_values: &col_values,
    };
    let points = g.points();
    let (nrows, ncols, bytes) = if wide {
        (
            row_values.len(),
            col_values.len() + 1,
            (points + row_values.len()) * NUMBER_CELL,
        )
    } else {
        (points, 3, points * 3 * NUMBER_CELL)
    };
    check_size(lua, func, nrows, ncols, bytes)?;
    let mut progress = Progress::new("building the table");
    let mut on_progress = |done: usize, total: usize| progress.update(done, total);
    let vectorized = f.opt_bool("vectorized")?.unwrap_or(false);
    // Vectorized: one call per row value with every column value, cached
    // for the points of that row (the grid visits points row by row).
    let col_vector = if vectorized {
        Some(vector::create(lua, col_values.clone())?)
    } else {
        None
    };
    let ncols_grid = col_values.len();
    let mut row_cache: Vec<Option<f64>> = Vec::new();
    let mut point = 0usize;
    let mut value = |r: f64, c: f64| -> Result<Option<f64>, String> {
        let Some(cols) = &col_vector else {
            return match value_fn.call::<LuaValue>((r, c)) {
                Ok(v) => grid_number(&v),
                Err(e) => Err(describe(&e).message),
            };
        };
        let j = point % ncols_grid;
        point += 1;
        if j == 0 {
            let v = value_fn
                .call::<LuaValue>((r, cols.clone()))
                .map_err(|e| format!("fn for the whole row failed: {}", describe(&e).message))?;
            row_cache = grid_row(&v, ncols_grid)?;
        }
        Ok(row_cache[j])
    };
    let sheet = if wide {
        g.wide_partial(&mut value, &mut on_progress)
    } else {
        g.long_partial(&value_name, &mut value, &mut on_progress)
    }
    .map_err(|e| kernel_err(func, e))?;
    drop(progress);
    lua.create_userdata(SheetUd::new(lua, sheet))
}

/// One table value from `fn`: a number, or nil for none.
fn grid_number(v: &LuaValue) -> Result<Option<f64>, String> {
    match v {
        LuaValue::Nil => Ok(None),
        LuaValue::Integer(i) => Ok(Some(*i as f64)),
        LuaValue::Number(x) => Ok(Some(*x)),
        other => Err(format!(
            "fn must return a number, or nil for no value, got {}",
            describe_value(other)
        )),
    }
}

/// A row of table values from a vectorized `fn`: a vector of `n` values,
/// or an array with keys 1..n (nil for no value).
fn grid_row(v: &LuaValue, n: usize) -> Result<Vec<Option<f64>>, String> {
    match v {
        LuaValue::UserData(ud) if ud.is::<vector::Vector>() => {
            let vec = ud.borrow::<vector::Vector>().map_err(|e| e.to_string())?;
            if vec.len() != n {
                return Err(format!(
                    "fn returned a vector of {} values for {n} column values",
                    vec.len()
                ));
            }
            Ok(vec.as_slice().iter().map(|&x| Some(x)).collect())
        }
        LuaValue::Table(t) => {
            let mut out = vec![None; n];
            let mut bad: Option<String> = None;
            t.for_each::<LuaValue, LuaValue>(|k, x| {
                if bad.is_some() {
                    return Ok(());
                }
                match k {
                    LuaValue::Integer(i) if i >= 1 && (i as usize) <= n => match grid_number(&x) {
                        Ok(v) => out[i as usize - 1] = v,
                        Err(m) => bad = Some(format!("[{i}]: {m}")),
                    },
                    other => {
                        bad = Some(format!(
                        "fn returned a table with the key {} for {n} column values (keys 1 to {n})",
                        describe_value(&other)
                    ))
                    }
                }
                Ok(())
            })
            .map_err(|e| describe(&e).message)?;
            match bad {
                Some(m) => Err(m),
                None => Ok(out),
            }
        }
        other => Err(format!(
            "a vectorized fn returns a vector or an array of values (nil for none), got {}",
            describe_value(other)
        )),
    }
}

const GRID_KEYS: &[&str] = &["rows", "cols", "fn", "layout", "value", "vectorized"];

/// Registers the `sheet` namespace and its help.
pub fn register(lua: &Lua) -> mlua::Result<()> {
    let ns = lua.create_table()?;
    let new = lua.create_function(sheet_new)?;
    let read = lua.create_function(read_csv)?;
    let grid_fn = lua.create_function(grid)?;
    ns.set("new", new.clone())?;
    ns.set("read_csv", read.clone())?;
    ns.set("grid", grid_fn.clone())?;
    lua.globals().set("sheet", ns.clone())?;
    tag(lua, LuaValue::Table(ns), "sheet")?;
    tag(lua, LuaValue::Function(new), "sheet.new")?;
    tag(lua, LuaValue::Function(read), "sheet.read_csv")?;
    tag(lua, LuaValue::Function(grid_fn), "sheet.grid")?;

    // Tag the methods so that help(s.add) finds them.
    let sample = lua.create_userdata(SheetUd::new(lua, Sheet::default()))?;
    let get: Function = lua
        .load("local u, k = ...; return u[k]")
        .set_name("=(meniscus)")
        .into_function()?;
    for name in METHODS {
        let f: LuaValue = get.call((sample.clone(), name))?;
        tag(lua, f, &format!("sheet:{name}"))?;
    }

    for (name, sig, doc) in help_entries() {
        add_help(lua, name, sig, &doc)?;
    }
    add_keys(lua, "sheet.grid", GRID_KEYS)?;
    add_keys(lua, "sheet.read_csv", &["delimiter", "empty_numbers"])?;
    add_keys(lua, "sheet:write_csv", &["delimiter"])?;
    add_keys(lua, "sheet:write_json", &["layout"])?;
    Ok(())
}

const TABLE_CAUTION: &str = "Tables built with meniscus are calculations, not the official\n\
alcoholometric tables: for excise, labelling or any legal declaration use the\n\
tables, instruments and procedures your authority prescribes.";

fn help_entries() -> Vec<(&'static str, &'static str, String)> {
    vec![
        (
            "sheet",
            "sheet (namespace and type)",
            format!(
                "Tables whose columns are data or formulas (computed per row from other\n\
                 columns, recomputed in dependency order when a cell changes).\n\
                 sheet.new{{\"abv\", \"t\"}}, sheet.read_csv(path), sheet.grid{{…}} make one.\n\
                 Methods: {}.\n\
                 Rows count from 1. Cells are numbers, strings or empty (nil).\n\
                 A sheet's cells count against the memory limit (--memory-limit), and one\n\
                 sheet holds at most {MAX_CELLS} cells.\n\n{TABLE_CAUTION}",
                METHODS.join(", ")
            ),
        ),
        (
            "sheet.new",
            "sheet.new{\"name1\", \"name2\", …} → sheet",
            "An empty sheet with these data columns (unique, non-blank names).\n\
             Add rows with s:add{…}, columns with s:set_column, formulas with s:formula."
                .into(),
        ),
        (
            "sheet.read_csv",
            "sheet.read_csv(path [, {delimiter = \",\", empty_numbers = false}]) → sheet",
            "Reads a CSV file (under the working directory or an --allow-path directory)\n\
             with a header row of unique names. A column whose every field is a number\n\
             is numeric; NaN, inf and (unless empty_numbers = true) empty fields are\n\
             refused there. Any problem (ragged row, unclosed quote, bytes that are not\n\
             UTF-8, a bad number) stops the read with the file, line and column.\n\
             The file may be at most an eighth of the memory limit."
                .into(),
        ),
        (
            "sheet.grid",
            "sheet.grid{rows = {name = …, values = …}, cols = {name = …, values = …},\n           fn = function(r, c) … end [, layout = \"long\"|\"wide\"] [, value = \"name\"]\n           [, vectorized = true]} → sheet",
            format!(
                "A two-way table: fn(row value, column value) for every pair; values are\n\
                 arrays or vectors (e.g. range(0, 100, 0.1)). fn returns a number, or nil\n\
                 for no value (an empty cell, e.g. outside a model's range); an error stops\n\
                 the build and names the pair.\n\
                 layout = \"long\" (default): columns <rows.name>, <cols.name>, <value>\n\
                 (value defaults to \"value\"), one row per pair, row value outer.\n\
                 layout = \"wide\": a first column <rows.name>, then one column per column\n\
                 value, named like \"t=15.5\" (read it with s:get(i, \"t=15.5\") or a\n\
                 function formula; such names are not Lua identifiers).\n\
                 vectorized = true: fn(row value, vector of all column values) is called\n\
                 once per row value and returns a vector or an array of values (nil for\n\
                 none), so that it can use bulk calls such as m:density{{abv = a, t = ts}}.\n\
                 Shows a progress bar on a terminal for large tables.\n\n{TABLE_CAUTION}"
            ),
        ),
        (
            "sheet:add",
            "s:add{name = value, …} or s:add{v1, v2, …} → s",
            "Appends a row: values by column name (data columns not named stay empty),\n\
             or one per data column in column order. Formula cells of the row are\n\
             computed. A value is a number, a string or \"\" (empty)."
                .into(),
        ),
        (
            "sheet:set",
            "s:set(row, column, value)",
            "Sets one cell of a data column (rows from 1) and recomputes, for that row,\n\
             the formula columns that depend on it, in dependency order. If a formula\n\
             fails, the cell keeps its old value."
                .into(),
        ),
        (
            "sheet:get",
            "s:get(row, column) → number | string | nil",
            "One cell (rows from 1); nil for an empty cell.".into(),
        ),
        (
            "sheet:set_column",
            "s:set_column(name, values) → s",
            "Replaces a data column's values (a vector, or an array of numbers and\n\
             strings with \"\" for an empty cell; one per row) and recomputes the formulas\n\
             depending on it. A new name adds a data column."
                .into(),
        ),
        (
            "sheet:formula",
            "s:formula(name, \"expression\") or s:formula(name, function(row) … end [, {deps}]) → s",
            "Makes name a formula column (adding it, or redefining a column) and computes\n\
             it for every row.\n\
             Expression: Lua text, compiled once. A name in it that is a column of the\n\
             sheet is that column's value in the row (nil when empty), except a field\n\
             after . or : and a key before = in a table constructor; every other name is\n\
             a global, read-only and live (a local variable is not visible). Example:\n\
             s:formula(\"rho\", \"m:density{abv = abv, t = t}\") with m global.\n\
             Function: called with a table of the dependency values of the row; the\n\
             dependencies are all data columns unless listed ({\"abv\", \"lpa\"}).\n\
             The result must be a number, a string or nil (empty). A formula that\n\
             depends on itself, directly or through others, is refused and the columns\n\
             of the cycle are named."
                .into(),
        ),
        (
            "sheet:formulas",
            "s:formulas() → {name = expression, …}",
            "The formula columns and their expressions (function formulas show their\n\
             dependencies)."
                .into(),
        ),
        (
            "sheet:recalculate",
            "s:recalculate() → s",
            "Recomputes every formula column, e.g. after a global the formulas read\n\
             has changed."
                .into(),
        ),
        (
            "sheet:column",
            "s:column(name) → vector | table",
            "A column's values: a vector when all are numbers, otherwise a table\n\
             (empty cells are nil; use s:nrows() for the length)."
                .into(),
        ),
        (
            "sheet:row",
            "s:row(i) → {name = value, …}",
            "Row i (from 1) as a table; empty cells are absent.".into(),
        ),
        (
            "sheet:nrows",
            "s:nrows() → integer",
            "Number of rows (also #s).".into(),
        ),
        (
            "sheet:ncols",
            "s:ncols() → integer",
            "Number of columns, data and formula.".into(),
        ),
        (
            "sheet:names",
            "s:names() → {name, …}",
            "Column names in order.".into(),
        ),
        (
            "sheet:filter",
            "s:filter(function(row) … end) → new sheet",
            "A new sheet with the rows for which the function (given the row as a\n\
             table) returns a true value. Formula columns stay formulas."
                .into(),
        ),
        (
            "sheet:sort",
            "s:sort(column [, \"asc\"|\"desc\"]) → s",
            "Sorts the rows in place, stably, by one column: numbers first, then texts\n\
             (by code point), then empty cells, which stay last in both directions."
                .into(),
        ),
        (
            "sheet:write_csv",
            "s:write_csv(path [, {delimiter = \",\"}])",
            "Writes the sheet as CSV with a header row (numbers in shortest round-trip\n\
             form), atomically: a temporary file in the same directory, then renamed.\n\
             Only under the working directory or an --allow-path directory."
                .into(),
        ),
        (
            "sheet:write_json",
            "s:write_json(path [, {layout = \"rows\"|\"columns\"}])",
            "Writes the sheet as JSON: rows (default) [{\"abv\": 40, …}, …] or columns\n\
             {\"abv\": [...], …}; empty cells are null. Atomic, allowed paths only."
                .into(),
        ),
    ]
}

#[cfg(test)]
mod tests {
    use super::referenced_names;

    #[test]
    fn free_names_skip_fields_keys_strings_and_comments() {
        assert_eq!(
            referenced_names("m:density{abv = abv, t = t}"),
            vec!["m", "abv", "t"]
        );
        assert_eq!(
            referenced_names("math.max(a, b.c) .. 'd e' -- f\n + [[g]] + x == y"),
            vec!["math", "a", "b", "x", "y"]
        );
        assert_eq!(referenced_names("a..b"), vec!["a", "b"]);
        assert_eq!(
            referenced_names("1e-5 * abv + 0x1F + t2"),
            vec!["abv", "t2"]
        );
        assert_eq!(referenced_names("not x and nil or true"), vec!["x"]);
        assert_eq!(referenced_names("--[==[ a ]==] b"), vec!["b"]);
        assert_eq!(referenced_names("\"it\\\"s\" .. q"), vec!["q"]);
        assert_eq!(referenced_names("{k=v}[k]"), vec!["v", "k"]);
    }
}
