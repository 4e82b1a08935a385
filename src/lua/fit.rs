//! Mixtures fitted from measured densities, from Lua: `mixture.fit{…}`
//! (rows from a CSV file, a table of rows or a table of columns),
//! `mixture.load(path)`, and the methods only a fitted mixture has
//! (`m:report()`, `m:save(path)`, `m:density_u{…}`, `m:pmv_u{…}`,
//! `m:excess_volume_u{…}`, `m:crosscheck{…}`, `m:fit_info()`,
//! `m:fit_data()`).
//!
//! How the fit travels with the mixture: a fitted mixture is an ordinary
//! mixture userdata ([`MixtureUd`], so every `m:…` method and every
//! function taking a mixture works on it unchanged), and the fit itself
//! ([`FitInfo`]: the model as a concrete [`FittedMixture`] and its report)
//! hangs on that userdata as a named Lua user value. Scripts cannot reach
//! user values (the `debug` library is not loaded), the `Mixture` trait
//! needs no downcasting, and `MixtureUd` keeps its shape. The fit-only
//! methods are registered on every mixture and say so when called on one
//! that was not fitted. Rust code reaches the fit with [`fit_of`].
//!
//! Data: `data=` is a CSV path (read through [`files`](super::files) and
//! [`Sheet::read_csv`]), a sheet (`sheet.new`, `sheet.read_csv`, …: its
//! current cells, formula columns included, through
//! [`FitData::from_sheet`]), a Lua table of row tables, or a table of
//! columns; every cell used must be a finite number, and an error names the
//! row and the column.

use std::cell::Cell;
use std::fmt::Write as _;
use std::sync::Arc;

use mlua::{AnyUserData, Lua, Table, UserData, UserDataMethods, Value};

use super::convert::{
    bulk, composition, describe_value, number, numbers, opt_number, Basis, CompositionArg, Fields,
    Numbers,
};
use super::errors::runtime;
use super::files;
use super::help::{add_help, add_keys, entry, tag};
use super::mixture::{mixture_userdata, MixtureUd};
use crate::kernel::fit::{
    fit, FitReport, FitRow, FitSpec, FittedMixture, OrderChoice, PureDensity, PureOrigin,
    PureSource, RowBasis, TermChoice, MAX_PURE_COEFFS, MAX_TERMS, MAX_T_ORDER,
};
use crate::kernel::sheet::{ColumnRef, CsvOptions, Sheet};
use crate::kernel::{self, Component, Mixture};

/// Name of the user value that carries the fit on a mixture userdata.
const FIT_KEY: &str = "meniscus.fit";

/// Data rows within this many kelvin of the cross-check temperature take
/// part in it by default.
pub const CROSSCHECK_T_TOL_C: f64 = 0.05;

/// A fitted model with what is known about its fit, carried by a fitted
/// mixture userdata.
#[derive(Debug)]
pub struct FitInfo {
    /// The model (the same one the userdata's `Arc<dyn Mixture>` points to).
    pub model: Arc<FittedMixture>,
    /// The report of the fit; for a loaded model, recomputed from the saved
    /// rows with the saved choices (`Err` says why it could not be).
    pub report: Result<FitReport, String>,
    /// A note printed above the report (e.g. that it was recomputed on
    /// load).
    pub note: Option<String>,
}

/// The Lua-invisible holder of a [`FitInfo`] (a user value of the
/// mixture userdata), with the model's data rows counted against the
/// host's memory limit for as long as it lives.
struct FitUd {
    info: Arc<FitInfo>,
    _rows: super::limits::Allocation,
}

impl UserData for FitUd {}

/// A mixture userdata for a fitted model, with its fit attached: all
/// `m:…` methods work, and the fit-only ones find the fit.
pub fn fitted_userdata(lua: &Lua, info: FitInfo) -> mlua::Result<AnyUserData> {
    let model: Arc<dyn Mixture> = info.model.clone();
    let words = info.model.provenance().rows.len() * KEPT_WORDS_PER_ROW;
    super::limits::check_alloc(lua, "mixture", words)?;
    let held = super::limits::Allocation::new(lua, words);
    let ud = mixture_userdata(lua, model)?;
    ud.set_named_user_value(
        FIT_KEY,
        lua.create_userdata(FitUd {
            info: Arc::new(info),
            _rows: held,
        })?,
    )?;
    Ok(ud)
}

/// The fit behind a mixture value, if it is a fitted mixture made by
/// `mixture.fit` or `mixture.load`.
pub fn fit_of(v: &Value) -> Option<Arc<FitInfo>> {
    let Value::UserData(ud) = v else { return None };
    fit_of_userdata(ud)
}

fn fit_of_userdata(ud: &AnyUserData) -> Option<Arc<FitInfo>> {
    if !ud.is::<MixtureUd>() {
        return None;
    }
    let holder: AnyUserData = ud.named_user_value::<Option<AnyUserData>>(FIT_KEY).ok()??;
    let info = holder.borrow::<FitUd>().ok()?.info.clone();
    Some(info)
}

/// The fit of the mixture a fit-only method was called on, or an error
/// saying that only fitted mixtures have it.
fn need_fit(ud: &AnyUserData, method: &str) -> mlua::Result<Arc<FitInfo>> {
    if let Some(info) = fit_of_userdata(ud) {
        return Ok(info);
    }
    let name = ud
        .borrow::<MixtureUd>()
        .map(|m| m.0.name().to_string())
        .unwrap_or_else(|_| "this value".into());
    Err(runtime(format!(
        "{method}: '{name}' is not a fitted mixture; {method} works on mixtures made by \
         mixture.fit{{…}} or mixture.load(path)"
    )))
}

// ---------------------------------------------------------------- data

/// Where the measured rows come from.
enum Origin {
    /// A kernel sheet (read from CSV, or handed over by a sheet binding).
    Sheet { sheet: Sheet, label: String },
    /// A Lua table of columns: name → array (or vector).
    Columns(Vec<(String, Value)>),
    /// A Lua sequence of row tables.
    Rows(Vec<Table>),
}

/// The measured rows of a fit: named numeric columns, whatever their
/// origin, with errors that name the row and the column.
pub struct FitData {
    origin: Origin,
    /// Known from the start for sheets and rows; for a table of columns,
    /// the length of the first column read (the others must match it).
    nrows: Cell<Option<usize>>,
    source: String,
}

impl FitData {
    /// Data from a kernel sheet, `label` naming it in messages and as the
    /// default source (a CSV file read for the fit, or a copy of a sheet
    /// userdata's cells).
    pub fn from_sheet(sheet: Sheet, label: impl Into<String>) -> FitData {
        let label = label.into();
        FitData {
            nrows: Cell::new(Some(sheet.nrows())),
            source: label.clone(),
            origin: Origin::Sheet { sheet, label },
        }
    }

    /// Number of rows (for a table of columns, 0 until a column was
    /// read).
    pub fn len(&self) -> usize {
        self.nrows.get().unwrap_or(0)
    }

    /// Whether there are no rows.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// How row `i` (from 0) is named in messages.
    fn row_label(&self, i: usize) -> String {
        match &self.origin {
            Origin::Sheet { label, .. } => format!("{label}, data row {}", i + 1),
            Origin::Columns(_) => format!("data row {}", i + 1),
            Origin::Rows(_) => format!("data[{}]", i + 1),
        }
    }

    fn column_names(&self) -> Vec<String> {
        match &self.origin {
            Origin::Sheet { sheet, .. } => {
                sheet.column_names().iter().map(|s| s.to_string()).collect()
            }
            Origin::Columns(cols) => cols.iter().map(|(n, _)| n.clone()).collect(),
            Origin::Rows(rows) => {
                let mut names = Vec::new();
                if let Some(first) = rows.first() {
                    for (k, _) in first.pairs::<Value, Value>().flatten() {
                        if let Value::String(s) = k {
                            names.push(s.to_string_lossy());
                        }
                    }
                }
                names.sort();
                names
            }
        }
    }

    fn unknown(&self, func: &str, role: &str, name: &str) -> mlua::Error {
        let names = self.column_names();
        let list = if names.is_empty() {
            "(none)".to_string()
        } else {
            names
                .iter()
                .map(|n| format!("'{n}'"))
                .collect::<Vec<_>>()
                .join(", ")
        };
        let place = match &self.origin {
            Origin::Sheet { label, .. } => format!(" in {label}"),
            _ => String::new(),
        };
        runtime(format!(
            "{func}: no column '{name}'{place} for the {role}; the columns are {list} \
             (name the column with {role}=\"…\")"
        ))
    }

    /// The column `name` as numbers; `role` (e.g. "density") says what it
    /// is for in messages.
    fn column(&self, lua: &Lua, func: &str, role: &str, name: &str) -> mlua::Result<Vec<f64>> {
        match &self.origin {
            Origin::Sheet { sheet, label } => {
                if !sheet.has_column(name) {
                    return Err(self.unknown(func, role, name));
                }
                let col = sheet
                    .column(name)
                    .map_err(|e| runtime(format!("{func}: {label}: {e}")))?;
                match col {
                    ColumnRef::Numbers(v) => Ok(v.to_vec()),
                    ColumnRef::Values(vals) => {
                        let mut out = Vec::with_capacity(vals.len());
                        for (i, v) in vals.iter().enumerate() {
                            match v {
                                kernel::sheet::Value::Number(x) => out.push(*x),
                                // One bad cell makes the whole CSV column
                                // text, so the cells that do read as numbers
                                // are taken as numbers and the first that
                                // does not is named.
                                kernel::sheet::Value::Text(s)
                                    if s.trim().parse::<f64>().is_ok_and(f64::is_finite) =>
                                {
                                    out.push(s.trim().parse::<f64>().unwrap_or(f64::NAN))
                                }
                                kernel::sheet::Value::Text(s) => {
                                    return Err(runtime(format!(
                                        "{func}: {}, column '{name}' ({role}): expected a number, got the text {:?}",
                                        self.row_label(i),
                                        s
                                    )))
                                }
                                kernel::sheet::Value::Empty => {
                                    return Err(runtime(format!(
                                        "{func}: {}, column '{name}' ({role}): expected a number, the cell is empty",
                                        self.row_label(i)
                                    )))
                                }
                            }
                        }
                        Ok(out)
                    }
                }
            }
            Origin::Columns(cols) => {
                let Some((_, v)) = cols.iter().find(|(n, _)| n == name) else {
                    return Err(self.unknown(func, role, name));
                };
                match numbers(lua, v, func, &format!("data.{name}"))? {
                    Numbers::Many(x) => match self.nrows.get() {
                        None => {
                            self.nrows.set(Some(x.len()));
                            Ok(x)
                        }
                        Some(n) if n != x.len() => Err(runtime(format!(
                            "{func}: data.{name} has {} values but the first column used has {n}; \
                             columns must have the same length",
                            x.len()
                        ))),
                        Some(_) => Ok(x),
                    },
                    Numbers::One(_) => Err(runtime(format!(
                        "{func}: data.{name} must be an array of numbers (a column), got a single number"
                    ))),
                }
            }
            Origin::Rows(rows) => {
                if !rows
                    .first()
                    .is_some_and(|r| !matches!(r.raw_get::<Value>(name), Ok(Value::Nil) | Err(_)))
                {
                    return Err(self.unknown(func, role, name));
                }
                super::limits::check_alloc(lua, func, rows.len())?;
                let mut out = Vec::with_capacity(rows.len());
                for (i, r) in rows.iter().enumerate() {
                    let v: Value = r.raw_get(name)?;
                    let what = format!("data[{}].{name} ({role})", i + 1);
                    match v {
                        Value::Nil => {
                            return Err(runtime(format!(
                                "{func}: data[{}] has no '{name}' ({role}); every row needs it",
                                i + 1
                            )))
                        }
                        v => out.push(number(&v, func, &what)?),
                    }
                }
                Ok(out)
            }
        }
    }
}

/// Reads `data=`: a CSV path, a sheet, a table of rows or a table of columns.
fn read_data(lua: &Lua, v: &Value, func: &str) -> mlua::Result<FitData> {
    match v {
        Value::String(s) => {
            let path = s.to_str()?.to_string();
            let text = files::read_text(lua, &path)
                .map_err(|e| runtime(format!("{func}: {}", super::errors::describe(&e).message)))?;
            let sheet = Sheet::read_csv(text.as_bytes(), &CsvOptions::default())
                .map_err(|e| runtime(format!("{func}: '{path}': {e}")))?;
            Ok(FitData::from_sheet(sheet, format!("'{path}'")))
        }
        Value::Table(t) => read_table(t, func),
        Value::UserData(ud) if ud.is::<super::sheet::SheetUd>() => {
            // A copy, so the sheet stays free for the formulas the fit
            // may call (a mixture's methods) while its columns are read.
            let sheet = super::sheet::snapshot(lua, ud, func)?;
            let source = format!("a sheet of {} rows", sheet.nrows());
            let mut data = FitData::from_sheet(sheet, "the sheet");
            data.source = source;
            Ok(data)
        }
        other => Err(runtime(format!(
            "{func}: data must be a CSV file path, a sheet, a table of rows like {{{{w = 0.1, density = 981.2, t = 20}}, …}} \
             or a table of columns like {{w = {{…}}, density = {{…}}, t = {{…}}}}, got {}",
            describe_value(other)
        ))),
    }
}

fn read_table(t: &Table, func: &str) -> mlua::Result<FitData> {
    let n = t.raw_len();
    let mut pairs = 0usize;
    let mut names: Vec<(String, Value)> = Vec::new();
    let mut odd_key: Option<String> = None;
    t.for_each::<Value, Value>(|k, v| {
        pairs += 1;
        match k {
            Value::String(s) => names.push((s.to_str()?.to_string(), v)),
            Value::Integer(i) if i >= 1 && (i as usize) <= n => {}
            other => {
                if odd_key.is_none() {
                    odd_key = Some(describe_value(&other));
                }
            }
        }
        Ok(())
    })?;
    if pairs == 0 {
        return Err(runtime(format!("{func}: data is an empty table")));
    }
    if n > 0 {
        if !names.is_empty() || odd_key.is_some() || pairs != n {
            return Err(runtime(format!(
                "{func}: data must be either a sequence of rows or a table of named columns, not both \
                 (it has {n} rows and other keys)"
            )));
        }
        let mut rows = Vec::with_capacity(n);
        for i in 1..=n {
            match t.raw_get::<Value>(i)? {
                Value::Table(r) => rows.push(r),
                other => {
                    return Err(runtime(format!(
                        "{func}: data[{i}] must be a row table like {{w = 0.1, density = 981.2, t = 20}}, got {}",
                        describe_value(&other)
                    )))
                }
            }
        }
        return Ok(FitData {
            origin: Origin::Rows(rows),
            nrows: Cell::new(Some(n)),
            source: "a Lua table of rows".into(),
        });
    }
    if let Some(k) = odd_key {
        return Err(runtime(format!(
            "{func}: data columns must be named by strings, found the key {k}"
        )));
    }
    names.sort_by(|a, b| a.0.cmp(&b.0));
    // The row count is that of the first column read (see `column`).
    Ok(FitData {
        origin: Origin::Columns(names),
        nrows: Cell::new(None),
        source: "a Lua table of columns".into(),
    })
}

// ---------------------------------------------------------------- spec

const FIT_KEYS: &[&str] = &[
    "data",
    "basis",
    "composition",
    "density",
    "t",
    "weight",
    "u_density",
    "components",
    "terms",
    "t_order",
    "pure",
    "t_center",
    "source",
    "date",
    "name",
];

const FIT_EXAMPLE: &str = "{data = \"lab.csv\", basis = \"abm\", composition = \"abm\", density = \"rho\", \
t = \"t_c\", components = {{name = \"2-propanol\", molar_mass = 60.096}, {name = \"water\", molar_mass = 18.015}}}";

fn opt_string(f: &Fields, key: &str) -> mlua::Result<Option<String>> {
    match f.get(key)?.as_ref() {
        None | Some(Value::Nil) => Ok(None),
        Some(Value::String(s)) => Ok(Some(s.to_str()?.to_string())),
        Some(other) => Err(runtime(format!(
            "{}: {key} must be a string, got {}",
            f.func(),
            describe_value(other)
        ))),
    }
}

/// `"auto"` (→ `None`) or a whole number from `lo` to `hi`.
fn auto_or_int(
    v: Option<&Value>,
    func: &str,
    key: &str,
    lo: usize,
    hi: usize,
) -> mlua::Result<Option<usize>> {
    let bad = |got: String| {
        runtime(format!(
            "{func}: {key} must be \"auto\" or a whole number from {lo} to {hi}, got {got}"
        ))
    };
    match v {
        None | Some(Value::Nil) => Ok(None),
        Some(Value::String(s)) if s.as_bytes().as_ref() == b"auto" => Ok(None),
        Some(v @ (Value::Integer(_) | Value::Number(_))) => {
            let x = number(v, func, key)?;
            if x.fract() != 0.0 || x < lo as f64 || x > hi as f64 {
                return Err(bad(super::format::fmt_number(x)));
            }
            Ok(Some(x as usize))
        }
        Some(other) => Err(bad(describe_value(other))),
    }
}

fn read_components(lua: &Lua, v: Option<&Value>, func: &str) -> mlua::Result<[Component; 2]> {
    let hint = "components must be two tables {name = …, molar_mass = …} (g/mol), the component \
                whose composition is given first";
    let Some(Value::Table(t)) = v else {
        return Err(runtime(format!(
            "{func}: {hint}; got {}",
            v.map_or("nothing".to_string(), describe_value)
        )));
    };
    let n = t.raw_len();
    let pairs = t.pairs::<Value, Value>().count();
    if n != 2 || pairs != 2 {
        return Err(runtime(format!(
            "{func}: {hint}; got a table with {pairs} entries"
        )));
    }
    let mut out = Vec::with_capacity(2);
    for i in 1..=2 {
        let c: Value = t.raw_get(i)?;
        let Value::Table(c) = c else {
            return Err(runtime(format!(
                "{func}: components[{i}] must be a table {{name = …, molar_mass = …}}, got {}",
                describe_value(&c)
            )));
        };
        let fname = format!("{func}: components[{i}]");
        let f = Fields::read(
            lua,
            &Value::Table(c),
            &fname,
            &["name", "molar_mass"],
            "{name = \"water\", molar_mass = 18.015}",
        )?;
        let name = opt_string(&f, "name")?
            .filter(|s| !s.trim().is_empty())
            .ok_or_else(|| runtime(format!("{func}: components[{i}] needs a name")))?;
        let mm = match f.get("molar_mass")?.as_ref() {
            Some(v) => number(v, &format!("{func}: components[{i}]"), "molar_mass")?,
            None => {
                return Err(runtime(format!(
                    "{func}: components[{i}] ({name}) needs molar_mass in g/mol"
                )))
            }
        };
        if mm <= 0.0 {
            return Err(runtime(format!(
                "{func}: components[{i}] ({name}): molar_mass must be a positive number of g/mol, got {}",
                super::format::fmt_number(mm)
            )));
        }
        out.push(Component::new(name, mm));
    }
    if out[0].name == out[1].name {
        return Err(runtime(format!(
            "{func}: the two components need different names, both are '{}'",
            out[0].name
        )));
    }
    Ok([out[0].clone(), out[1].clone()])
}

/// One given pure density: a number (kg/m³, constant), a table
/// `{t0 = …, coefficients = {c0, c1, …}}`, or `"data"`.
fn read_pure_one(lua: &Lua, v: &Value, func: &str, what: &str) -> mlua::Result<PureSource> {
    match v {
        Value::Nil => Ok(PureSource::FromData),
        Value::String(s) if s.as_bytes().as_ref() == b"data" => Ok(PureSource::FromData),
        Value::Integer(_) | Value::Number(_) => {
            let rho = number(v, func, what)?;
            if rho <= 0.0 {
                return Err(runtime(format!(
                    "{func}: {what} must be a positive density in kg/m³, got {}",
                    super::format::fmt_number(rho)
                )));
            }
            Ok(PureSource::Given(PureDensity::constant(rho)))
        }
        Value::Table(_) => {
            let fname = format!("{func}: {what}");
            let f = Fields::read(
                lua,
                v,
                &fname,
                &["t0", "coefficients"],
                "{t0 = 20, coefficients = {998.2, -0.21, -0.0045}}",
            )?;
            let t0 = opt_number(f.get("t0")?.as_ref(), func, &format!("{what}.t0"))?.unwrap_or(20.0);
            let c = match f.get("coefficients")?.as_ref() {
                Some(Value::Table(c)) => super::convert::table_numbers(
                    lua,
                    c,
                    func,
                    &format!("{what}.coefficients"),
                )?,
                other => {
                    return Err(runtime(format!(
                        "{func}: {what}.coefficients must be an array {{c0, c1, …}} (kg/m³, kg/m³/K, …), got {}",
                        other.map_or("nothing".to_string(), describe_value)
                    )))
                }
            };
            if c.is_empty() || c.len() > MAX_PURE_COEFFS {
                return Err(runtime(format!(
                    "{func}: {what}.coefficients needs 1 to {MAX_PURE_COEFFS} numbers, got {}",
                    c.len()
                )));
            }
            Ok(PureSource::Given(PureDensity::polynomial(t0, c)))
        }
        other => Err(runtime(format!(
            "{func}: {what} must be a density in kg/m³, a table {{t0 = …, coefficients = {{…}}}} or \"data\", got {}",
            describe_value(other)
        ))),
    }
}

/// `pure = {…}`: by position (1, 2) or by component name.
fn read_pure(
    lua: &Lua,
    v: Option<&Value>,
    func: &str,
    comps: &[Component; 2],
) -> mlua::Result<[PureSource; 2]> {
    let mut out = [PureSource::FromData, PureSource::FromData];
    let Some(v) = v else { return Ok(out) };
    let Value::Table(t) = v else {
        return Err(runtime(format!(
            "{func}: pure must be a table, by position or component name, e.g. \
             {{water = 998.2}} or {{nil, {{t0 = 20, coefficients = {{998.2, -0.21}}}}}}, got {}",
            describe_value(v)
        )));
    };
    let mut seen = [false; 2];
    for pair in t.pairs::<Value, Value>() {
        let (k, val) = pair?;
        let idx = match &k {
            Value::Integer(i @ 1..=2) => Some(*i as usize - 1),
            Value::String(s) => {
                let s = s.to_str()?.to_string();
                comps.iter().position(|c| c.name == s)
            }
            _ => None,
        };
        let Some(i) = idx else {
            return Err(runtime(format!(
                "{func}: pure has the key {}; use 1, 2 or a component name ('{}', '{}')",
                describe_value(&k),
                comps[0].name,
                comps[1].name
            )));
        };
        if seen[i] {
            return Err(runtime(format!(
                "{func}: pure gives the density of {} twice (by position and by name)",
                comps[i].name
            )));
        }
        seen[i] = true;
        out[i] = read_pure_one(
            lua,
            &val,
            func,
            &format!("pure density of {}", comps[i].name),
        )?;
    }
    Ok(out)
}

/// Reads the arguments of `mixture.fit` into a spec and rows.
fn read_fit_args(lua: &Lua, arg: &Value) -> mlua::Result<(FitSpec, Vec<FitRow>, FitData)> {
    let func = "mixture.fit";
    let f = Fields::read(lua, arg, func, FIT_KEYS, FIT_EXAMPLE)?;
    let components = read_components(lua, f.get("components")?.as_ref(), func)?;
    let basis_name = opt_string(&f, "basis")?.unwrap_or_else(|| "w".into());
    let basis = match basis_name.as_str() {
        "w" => RowBasis::W,
        "abm" => RowBasis::Abm,
        "x" => RowBasis::X,
        other => {
            return Err(runtime(format!(
                "{func}: basis must be \"w\" (mass fraction, 0–1), \"abm\" (% mass) or \"x\" (mole fraction), got {other:?}"
            )))
        }
    };
    let Some(data_v) = f.get("data")? else {
        return Err(runtime(format!(
            "{func}: data is required (a CSV path, a sheet, a table of rows or a table of columns)"
        )));
    };
    let data = read_data(lua, &data_v, func)?;
    let comp_col = opt_string(&f, "composition")?.unwrap_or_else(|| basis_name.clone());
    let rho_col = opt_string(&f, "density")?.unwrap_or_else(|| "density".into());
    let comp = data.column(lua, func, "composition", &comp_col)?;
    if data.is_empty() {
        return Err(runtime(format!("{func}: the data have no rows")));
    }
    let rho = data.column(lua, func, "density", &rho_col)?;
    let t: Vec<f64> = match f.get("t")?.as_ref() {
        None => data.column(lua, func, "t", "t")?,
        Some(Value::String(s)) => {
            let name = s.to_str()?.to_string();
            data.column(lua, func, "t", &name)?
        }
        Some(v @ (Value::Integer(_) | Value::Number(_))) => {
            vec![number(v, func, "t")?; data.len()]
        }
        Some(other) => {
            return Err(runtime(format!(
                "{func}: t must name the temperature column (°C) or be one temperature for every row, got {}",
                describe_value(other)
            )))
        }
    };
    let u_rho: Option<Vec<f64>> = match (opt_string(&f, "weight")?, opt_string(&f, "u_density")?) {
        (Some(_), Some(_)) => {
            return Err(runtime(format!(
                "{func}: give either weight (1/u², (kg/m³)⁻²) or u_density (kg/m³), not both"
            )))
        }
        (Some(col), None) => {
            let wts = data.column(lua, func, "weight", &col)?;
            let mut u = Vec::with_capacity(wts.len());
            for (i, &wt) in wts.iter().enumerate() {
                if wt <= 0.0 {
                    return Err(runtime(format!(
                        "{func}: {}, column '{col}' (weight): a weight must be positive, got {}; \
                         leave a row out of the data instead of giving it weight 0",
                        data.row_label(i),
                        super::format::fmt_number(wt)
                    )));
                }
                u.push(1.0 / wt.sqrt());
            }
            Some(u)
        }
        (None, Some(col)) => {
            let u = data.column(lua, func, "u_density", &col)?;
            if let Some(i) = u.iter().position(|&x| x <= 0.0) {
                return Err(runtime(format!(
                    "{func}: {}, column '{col}' (u_density): a standard uncertainty must be positive, got {}",
                    data.row_label(i),
                    super::format::fmt_number(u[i])
                )));
            }
            Some(u)
        }
        (None, None) => None,
    };
    let mut rows = Vec::with_capacity(data.len());
    for i in 0..data.len() {
        let mut r = FitRow::from_basis(basis, comp[i], rho[i], t[i], &components)
            .map_err(|e| runtime(format!("{func}: {}: {e}", data.row_label(i))))?;
        if let Some(u) = &u_rho {
            r = r.with_u_rho(u[i]);
        }
        rows.push(r);
    }

    let name = opt_string(&f, "name")?
        .unwrap_or_else(|| format!("{}–{}", components[0].name, components[1].name));
    let mut spec = FitSpec::new(name, components.clone());
    spec.terms = match auto_or_int(f.get("terms")?.as_ref(), func, "terms", 1, MAX_TERMS)? {
        None => spec.terms,
        Some(n) => TermChoice::Fixed(n),
    };
    spec.t_order = match auto_or_int(f.get("t_order")?.as_ref(), func, "t_order", 0, MAX_T_ORDER)? {
        None => OrderChoice::Auto,
        Some(q) => OrderChoice::Fixed(q),
    };
    spec.pure = read_pure(lua, f.get("pure")?.as_ref(), func, &components)?;
    spec.t_center = opt_number(f.get("t_center")?.as_ref(), func, "t_center")?;
    spec.source = opt_string(&f, "source")?.unwrap_or_else(|| data.source.clone());
    spec.date = opt_string(&f, "date")?.unwrap_or_default();
    Ok((spec, rows, data))
}

fn fit_error(e: kernel::Error, data: &FitData, func: &str) -> mlua::Error {
    match e {
        kernel::Error::FitRow { row, message } if row >= 1 && row <= data.len() => {
            runtime(format!("{func}: {}: {message}", data.row_label(row - 1)))
        }
        e => runtime(format!("{func}: {e}")),
    }
}

/// Most rows one fit takes.
pub const MAX_FIT_ROWS: usize = 1_000_000;
/// f64 words the kernel fit works with per row (the widest design matrix,
/// 16 terms × 3 temperature coefficients, plus per-row vectors), counted
/// against the host's memory limit while it runs.
const FIT_WORDS_PER_ROW: usize = 80;
/// f64 words a fitted model keeps per data row (its provenance).
const KEPT_WORDS_PER_ROW: usize = 5;

fn do_fit(lua: &Lua, arg: Value) -> mlua::Result<AnyUserData> {
    let func = "mixture.fit";
    let (spec, rows, data) = read_fit_args(lua, &arg)?;
    if rows.len() > MAX_FIT_ROWS {
        return Err(runtime(format!(
            "{func}: {} rows is more than the {MAX_FIT_ROWS} one fit takes",
            rows.len()
        )));
    }
    // The kernel's working memory is Rust memory the Lua limit does not
    // see: check it against the host's limit and hold it while fitting.
    super::limits::check_alloc(lua, func, rows.len() * FIT_WORDS_PER_ROW)?;
    let _working = super::limits::Allocation::new(lua, rows.len() * FIT_WORDS_PER_ROW);
    let fitted = fit(&spec, &rows).map_err(|e| fit_error(e, &data, "mixture.fit"))?;
    fitted_userdata(
        lua,
        FitInfo {
            model: Arc::new(fitted.model),
            report: Ok(fitted.report),
            note: None,
        },
    )
}

/// Recomputes the report of a loaded model: the saved rows refitted with
/// the saved term count, order, centre and pure curves. Returns the report
/// (or why there is none) and a note for the top of the report.
fn report_for_loaded(model: &FittedMixture, path: &str) -> (Result<FitReport, String>, String) {
    let prov = model.provenance();
    let mut spec = FitSpec::new(model.name(), model.components().clone());
    spec.terms = TermChoice::Fixed(model.terms());
    spec.t_order = OrderChoice::Fixed(model.t_order());
    spec.t_center = Some(model.t_center());
    for i in 0..2 {
        let (d, origin) = model.pure_density_curve(i);
        spec.pure[i] = match origin {
            PureOrigin::Given => PureSource::Given(d.clone()),
            PureOrigin::Fitted => PureSource::FromData,
        };
    }
    spec.source = prov.source.clone();
    spec.date = prov.date.clone();
    let mut note = format!(
        "Model loaded from '{path}'. This report was recomputed from the {} saved rows with the \
         saved choices ({} terms, temperature order {}); the term-selection table of the original \
         fit is not kept in the file.",
        prov.rows.len(),
        model.terms(),
        model.t_order()
    );
    match fit(&spec, &prov.rows) {
        Ok(refit) => {
            // The saved coefficients should be what the saved rows give;
            // a difference beyond rounding means the file was edited.
            let (a, b) = (model.coefficients(), refit.model.coefficients());
            let cov = model.covariance();
            let mut worst = 0.0f64;
            for (k, (ra, rb)) in a.iter().zip(&b).enumerate() {
                for (j, (x, y)) in ra.iter().zip(rb).enumerate() {
                    let idx = k * ra.len() + j;
                    let scale = cov[(idx, idx)].sqrt().max(x.abs()).max(1e-300);
                    worst = worst.max((x - y).abs() / scale);
                }
            }
            if worst > 1e-6 {
                let _ = write!(
                    note,
                    "\nWARNING: the saved coefficients differ from a refit of the saved rows \
                     (largest difference {worst:.2e} of a coefficient's size or uncertainty): the \
                     file may have been edited; results use the saved coefficients."
                );
            }
            (Ok(refit.report), note)
        }
        Err(e) => (
            Err(format!("the saved rows could not be refitted: {e}")),
            note,
        ),
    }
}

fn do_load(lua: &Lua, path: Value) -> mlua::Result<AnyUserData> {
    let func = "mixture.load";
    let Value::String(s) = &path else {
        return Err(runtime(format!(
            "{func}: path must be a string, got {}",
            describe_value(&path)
        )));
    };
    let path = s.to_str()?.to_string();
    let text = files::read_text(lua, &path)
        .map_err(|e| runtime(format!("{func}: {}", super::errors::describe(&e).message)))?;
    let model =
        FittedMixture::from_json(&text).map_err(|e| runtime(format!("{func}: '{path}': {e}")))?;
    let (report, note) = report_for_loaded(&model, &path);
    fitted_userdata(
        lua,
        FitInfo {
            model: Arc::new(model),
            report,
            note: Some(note),
        },
    )
}

// ---------------------------------------------------------------- methods

/// The caution printed under every fit report.
pub const FIT_CAUTION: &str =
    "A fitted model is a calculation from your own measurements, valid only \
within the range of its data; it is not a certified table. Declarations for excise, \
labelling or safety must use the tables and instruments the local authority prescribes. \
Many solvents and high-strength alcohols are flammable.";

/// The report as `m:report()` returns it: a note (loaded models), the
/// kernel report, the data's provenance and the caution.
pub fn report_text(info: &FitInfo) -> String {
    let mut s = String::new();
    if let Some(note) = &info.note {
        s.push_str(note);
        s.push_str("\n\n");
    }
    match &info.report {
        Ok(r) => {
            let _ = write!(s, "{r}");
        }
        Err(e) => {
            let _ = writeln!(s, "No fit report: {e}");
        }
    }
    let p = info.model.provenance();
    let _ = writeln!(
        s,
        "\nData: {} rows from {}{}",
        p.rows.len(),
        if p.source.is_empty() {
            "an unnamed source"
        } else {
            &p.source
        },
        if p.date.is_empty() {
            String::new()
        } else {
            format!(", {}", p.date)
        }
    );
    let _ = writeln!(s, "\n{FIT_CAUTION}");
    s
}

const U_DENSITY_KEYS: &[&str] = &["w", "abm", "x", "abv", "proof", "t", "t_ref"];
const U_PROPERTY_KEYS: &[&str] = &["w", "abm", "x", "abv", "proof", "density", "t", "t_ref"];
const CROSSCHECK_KEYS: &[&str] = &["x", "t", "t_tol", "window"];

/// Evaluates an uncertainty method element-wise: the composition (any
/// basis) and `t` (default 20 °C) from `arg`, `prop` at each (w, t).
fn estimate<const K: usize>(
    lua: &Lua,
    model: &FittedMixture,
    arg: &Value,
    func: &str,
    keys: &'static [&'static str],
    allow_density: bool,
    prop: impl Fn(&FittedMixture, f64, f64) -> kernel::Result<[f64; K]>,
) -> mlua::Result<[Value; K]> {
    let f = Fields::read(lua, arg, func, keys, "{abm = 40, t = 25}")?;
    let c = composition(lua, &f, allow_density)?;
    let t = if c.basis == Basis::Density {
        c.t_meas.clone()
    } else {
        f.numbers_or(lua, "t", kernel::T_REF_C)?
    };
    let basis = c.basis;
    let key = super::convert::COMPOSITION_KEYS[basis as usize];
    bulk(
        lua,
        func,
        &[(key, &c.value), ("t_ref", &c.t_ref), ("t", &t)],
        |x| {
            let w = model.mass_fraction(CompositionArg::composition(basis, x[0], x[1], x[2]))?;
            prop(model, w, x[2])
        },
    )?
    .into_values(lua)
}

fn named<const K: usize>(lua: &Lua, names: [&str; K], values: [Value; K]) -> mlua::Result<Table> {
    let t = lua.create_table_with_capacity(0, K)?;
    for (k, v) in names.into_iter().zip(values) {
        t.raw_set(k, v)?;
    }
    Ok(t)
}

fn seq(lua: &Lua, xs: impl IntoIterator<Item = f64>) -> mlua::Result<Table> {
    lua.create_sequence_from(xs)
}

fn crosscheck(lua: &Lua, info: &FitInfo, arg: &Value) -> mlua::Result<Table> {
    let func = "crosscheck";
    let f = Fields::read(
        lua,
        arg,
        func,
        CROSSCHECK_KEYS,
        "{x = {0.1, 0.3, 0.5}, t = 25}",
    )?;
    let xs = match f.numbers(lua, "x")? {
        Some(Numbers::One(x)) => vec![x],
        Some(Numbers::Many(v)) => v,
        None => {
            return Err(runtime(format!(
                "{func}: x is required (mole fractions of the first component where to compare)"
            )))
        }
    };
    let t = match opt_number(f.get("t")?.as_ref(), func, "t")? {
        Some(t) => t,
        None => {
            return Err(runtime(format!(
                "{func}: t is required (a temperature of the data, °C)"
            )))
        }
    };
    let t_tol = opt_number(f.get("t_tol")?.as_ref(), func, "t_tol")?.unwrap_or(CROSSCHECK_T_TOL_C);
    let window = match opt_number(f.get("window")?.as_ref(), func, "window")? {
        None => None,
        Some(w) if w.fract() == 0.0 && (3.0..=10_000.0).contains(&w) => Some(w as usize),
        Some(w) => {
            return Err(runtime(format!(
                "{func}: window must be a whole number of rows, at least 3, got {}",
                super::format::fmt_number(w)
            )))
        }
    };
    let cc = info
        .model
        .cross_check(t, t_tol, &xs, window)
        .map_err(|e| runtime(format!("{func}: {e}")))?;
    let out = lua.create_table()?;
    out.raw_set("t", cc.t)?;
    out.raw_set("text", cc.to_string())?;
    let r = &cc.rows;
    out.raw_set("x", seq(lua, r.iter().map(|c| c.x))?)?;
    out.raw_set("v1", seq(lua, r.iter().map(|c| c.fitted[0].value))?)?;
    out.raw_set("u1", seq(lua, r.iter().map(|c| c.fitted[0].u))?)?;
    out.raw_set("v1_tangent", seq(lua, r.iter().map(|c| c.local.v1))?)?;
    out.raw_set("v2", seq(lua, r.iter().map(|c| c.fitted[1].value))?)?;
    out.raw_set("u2", seq(lua, r.iter().map(|c| c.fitted[1].u))?)?;
    out.raw_set("v2_tangent", seq(lua, r.iter().map(|c| c.local.v2))?)?;
    out.raw_set("rows", seq(lua, r.iter().map(|c| c.local.points as f64))?)?;
    Ok(out)
}

fn fit_info(lua: &Lua, info: &FitInfo) -> mlua::Result<Table> {
    let m = &info.model;
    let t = lua.create_table()?;
    t.raw_set("terms", m.terms())?;
    t.raw_set("t_order", m.t_order())?;
    t.raw_set("t_center", m.t_center())?;
    let coefs = lua.create_table()?;
    for (k, row) in m.coefficients().into_iter().enumerate() {
        coefs.raw_set(k + 1, seq(lua, row)?)?;
    }
    t.raw_set("coefficients", coefs)?;
    let cov = m.covariance();
    let q1 = m.t_order() + 1;
    let us = lua.create_table()?;
    for k in 0..m.terms() {
        us.raw_set(
            k + 1,
            seq(lua, (0..q1).map(|j| cov[(k * q1 + j, k * q1 + j)].sqrt()))?,
        )?;
    }
    t.raw_set("u_coefficients", us)?;
    let d = m.data_range();
    t.raw_set(
        "data_range",
        named(
            lua,
            ["w_min", "w_max", "t_min", "t_max"],
            [d.w_min, d.w_max, d.t_min, d.t_max].map(Value::Number),
        )?,
    )?;
    let p = m.provenance();
    t.raw_set("rows", p.rows.len())?;
    t.raw_set("source", p.source.as_str())?;
    t.raw_set("date", p.date.as_str())?;
    for i in 0..2 {
        let (curve, origin) = m.pure_density_curve(i);
        let pt = lua.create_table()?;
        pt.raw_set("t0", curve.t0)?;
        pt.raw_set(
            "coefficients",
            seq(lua, curve.coefficients.iter().copied())?,
        )?;
        pt.raw_set(
            "origin",
            match origin {
                PureOrigin::Fitted => "fitted",
                PureOrigin::Given => "given",
            },
        )?;
        t.raw_set(format!("pure{}", i + 1), pt)?;
    }
    if let Ok(r) = &info.report {
        t.raw_set("residual_sd", r.residual_sd_rho)?;
        t.raw_set("residual_sd_ve", r.residual_sd_ve)?;
        t.raw_set("dof", r.dof)?;
        t.raw_set("condition_number", r.condition_number)?;
        t.raw_set("weighted", r.weighted)?;
        t.raw_set("terms_auto", r.terms_auto)?;
        t.raw_set("order_auto", r.order_auto)?;
        if let Some(b) = r.birge_ratio {
            t.raw_set("birge_ratio", b)?;
        }
        t.raw_set(
            "outliers",
            seq(lua, r.outliers.iter().map(|&i| (i + 1) as f64))?,
        )?;
        t.raw_set(
            "warnings",
            lua.create_sequence_from(r.warnings.iter().map(|s| s.as_str()))?,
        )?;
    }
    Ok(t)
}

fn fit_data(lua: &Lua, info: &FitInfo) -> mlua::Result<Table> {
    let rows = &info.model.provenance().rows;
    let t = lua.create_table()?;
    t.raw_set("w", seq(lua, rows.iter().map(|r| r.w))?)?;
    t.raw_set("density", seq(lua, rows.iter().map(|r| r.rho))?)?;
    t.raw_set("t", seq(lua, rows.iter().map(|r| r.t))?)?;
    if rows.iter().all(|r| r.u_rho.is_some()) && !rows.is_empty() {
        t.raw_set(
            "u_density",
            seq(lua, rows.iter().map(|r| r.u_rho.unwrap_or(f64::NAN)))?,
        )?;
    }
    Ok(t)
}

/// Method names only fitted mixtures answer (for help, tags, completion).
pub const FIT_METHODS: [&str; 8] = [
    "report",
    "save",
    "density_u",
    "pmv_u",
    "excess_volume_u",
    "crosscheck",
    "fit_info",
    "fit_data",
];

/// Adds the fit-only methods to the mixture userdata (called from
/// `MixtureUd::add_methods`).
pub fn add_fit_methods<M: UserDataMethods<MixtureUd>>(methods: &mut M) {
    methods.add_function("report", |_, ud: AnyUserData| {
        let info = need_fit(&ud, "report")?;
        Ok(report_text(&info))
    });
    methods.add_function("save", |lua, (ud, path): (AnyUserData, Value)| {
        let info = need_fit(&ud, "save")?;
        let Value::String(s) = &path else {
            return Err(runtime(format!(
                "save: path must be a string, got {}",
                describe_value(&path)
            )));
        };
        let path = s.to_str()?.to_string();
        let json = info
            .model
            .to_json()
            .map_err(|e| runtime(format!("save: {e}")))?;
        files::write_text(lua, &path, json.as_bytes())
            .map_err(|e| runtime(format!("save: {}", super::errors::describe(&e).message)))?;
        Ok(())
    });
    methods.add_function("density_u", |lua, (ud, arg): (AnyUserData, Value)| {
        let info = need_fit(&ud, "density_u")?;
        let v = estimate(
            lua,
            &info.model,
            &arg,
            "density_u",
            U_DENSITY_KEYS,
            false,
            |m, w, t| {
                let e = m.density_u(w, t)?;
                Ok([e.value, e.u])
            },
        )?;
        named(lua, ["density", "u"], v)
    });
    methods.add_function("pmv_u", |lua, (ud, arg): (AnyUserData, Value)| {
        let info = need_fit(&ud, "pmv_u")?;
        let v = estimate(
            lua,
            &info.model,
            &arg,
            "pmv_u",
            U_PROPERTY_KEYS,
            true,
            |m, w, t| {
                let [a, b] = m.partial_molar_volumes_u(w, t)?;
                Ok([a.value, a.u, b.value, b.u])
            },
        )?;
        named(lua, ["v1", "u1", "v2", "u2"], v)
    });
    methods.add_function("excess_volume_u", |lua, (ud, arg): (AnyUserData, Value)| {
        let info = need_fit(&ud, "excess_volume_u")?;
        let v = estimate(
            lua,
            &info.model,
            &arg,
            "excess_volume_u",
            U_PROPERTY_KEYS,
            true,
            |m, w, t| {
                let e = m.excess_molar_volume_u(w, t)?;
                Ok([e.value, e.u])
            },
        )?;
        named(lua, ["ve", "u"], v)
    });
    methods.add_function("crosscheck", |lua, (ud, arg): (AnyUserData, Value)| {
        let info = need_fit(&ud, "crosscheck")?;
        crosscheck(lua, &info, &arg)
    });
    methods.add_function("fit_info", |lua, ud: AnyUserData| {
        let info = need_fit(&ud, "fit_info")?;
        fit_info(lua, &info)
    });
    methods.add_function("fit_data", |lua, ud: AnyUserData| {
        let info = need_fit(&ud, "fit_data")?;
        fit_data(lua, &info)
    });
}

// ---------------------------------------------------------------- register

/// Adds `mixture.fit` and `mixture.load` to the `mixture` namespace (which
/// [`super::mixture::register`] must have made), their help, and help for
/// the fit-only methods.
pub fn register(lua: &Lua) -> mlua::Result<()> {
    let ns: Table = lua.globals().raw_get("mixture")?;
    let fit_fn = lua.create_function(do_fit)?;
    let load_fn = lua.create_function(do_load)?;
    ns.raw_set("fit", fit_fn.clone())?;
    ns.raw_set("load", load_fn.clone())?;
    tag(lua, Value::Function(fit_fn), "mixture.fit")?;
    tag(lua, Value::Function(load_fn), "mixture.load")?;

    super::mixture::tag_methods(lua, &FIT_METHODS)?;

    if let Some(e) = entry(lua, "mixture") {
        add_help(
            lua,
            "mixture",
            &e.signature,
            &format!(
                "{}\n\nmixture.fit{{…}} fits a mixture to your density measurements;\n\
                 mixture.load(path) reads one saved with m:save(path). Fitted mixtures\n\
                 have every method above plus {}.",
                e.doc,
                FIT_METHODS.join(", ")
            ),
        )?;
    }
    for (name, sig, doc, keys) in help_entries() {
        add_help(lua, name, sig, &doc)?;
        if !keys.is_empty() {
            add_keys(lua, name, keys)?;
        }
    }
    Ok(())
}

const FITTED_ONLY: &str = "Only for fitted mixtures (mixture.fit, mixture.load).";

fn help_entries() -> Vec<(&'static str, &'static str, String, &'static [&'static str])> {
    let range = "A fitted model holds only within its data: composition span of all rows,\n\
                 temperature span of the mixture rows (m:validity()). Evaluating outside\n\
                 it is an error naming the quantity and the range, never a silent\n\
                 extrapolation.";
    vec![
        (
            "mixture.fit",
            "mixture.fit{data=…, basis=\"w\"|\"abm\"|\"x\", composition=…, density=…, t=…, components={{name=…, molar_mass=…}, {…}}} → m",
            format!(
                "Fits a binary mixture to measured densities and returns it as a mixture\n\
                 with every method of mixture.ethanol_water(), plus the fit-only methods\n\
                 {}.\n\n\
                 data: a CSV file path (header row, one row per measurement), a sheet\n\
                 (its current cells, formula columns included), a table of\n\
                 rows {{{{w = 0.1, density = 981.2, t = 20}}, …}} or a table of columns\n\
                 {{w = {{…}}, density = {{…}}, t = {{…}}}}. Every cell used must be a number.\n\
                 basis: how composition is given: w (mass fraction of the first component,\n\
                 0–1, the default), abm (% mass) or x (mole fraction).\n\
                 composition, density, t: the column names (defaults: the basis name,\n\
                 \"density\", \"t\"); density in kg/m³, t in °C; t may also be one number\n\
                 for data all at one temperature.\n\
                 weight (column of 1/u², (kg/m³)⁻²) or u_density (column of standard\n\
                 uncertainties, kg/m³): optional, for a weighted fit. Without them every\n\
                 density is taken to have the same uncertainty (a least-squares fit in\n\
                 density; the same coefficients as with a constant u_density).\n\
                 components: the two components, the one whose composition is given first,\n\
                 molar masses in g/mol.\n\
                 terms: \"auto\" (default: 1 to 12 Redlich–Kister terms, chosen by AICc) or\n\
                 a number 1–{MAX_TERMS}. t_order: \"auto\" (default) or 0, 1, 2, the order in\n\
                 temperature of the coefficients (1 and 2 need data at 2 and 3 temperatures).\n\
                 pure: given pure densities instead of the data's pure rows, by position or\n\
                 name: {{water = 997.05}} (constant, kg/m³) or\n\
                 {{[2] = {{t0 = 20, coefficients = {{998.2, -0.21, -0.0045}}}}}} (ρ = Σ c_m (t − t0)^m).\n\
                 t_center: centre (°C) of the temperature polynomials (default: mean t).\n\
                 source, date, name: kept with the model and saved with it (source\n\
                 defaults to the CSV path).\n\n\
                 The model: V_m = x V₁*(t) + (1−x) V₂*(t) + x(1−x) Σ A_k(t)(2x−1)^k. Read\n\
                 m:report() before using the model.\n{range}\n\n{FIT_CAUTION}",
                FIT_METHODS.join(", ")
            ),
            FIT_KEYS,
        ),
        (
            "mixture.load",
            "mixture.load(path) → m",
            format!(
                "Reads a fitted mixture saved by m:save(path) (versioned JSON with the\n\
                 coefficients, their covariance, the pure curves, the data range and the\n\
                 data rows with their source). The model is exactly the saved one; its\n\
                 report is recomputed from the saved rows with the saved choices.\n{range}"
            ),
            &[],
        ),
        (
            "mixture:report",
            "m:report() → text",
            format!(
                "The fit report: data, pure-component curves, Redlich–Kister coefficients\n\
                 a_kj ± u, residual sd of density and V^E, √(χ²/dof) for weighted fits,\n\
                 outliers (|studentized residual| above the Student-t value as rare as\n\
                 3σ under normal errors: about 3.3 for 40 degrees of freedom, more for\n\
                 fewer), condition number, the AICc table of\n\
                 the term selection, warnings, the data's source. print(m:report()).\n\
                 {FITTED_ONLY}"
            ),
            &[],
        ),
        (
            "mixture:save",
            "m:save(path)",
            format!(
                "Saves the fitted model as versioned JSON (format\n\
                 \"meniscus-fitted-mixture\", version {}), with the data rows and their source;\n\
                 mixture.load(path) reads it back. Written atomically, only under the working\n\
                 directory or an --allow-path directory. {FITTED_ONLY}",
                crate::kernel::fit::FORMAT_VERSION
            ),
            &[],
        ),
        (
            "mixture:density_u",
            "m:density_u{abm=…, t=…} → {density=…, u=…} (kg/m³)",
            format!(
                "Density with its standard uncertainty from the fit: the coefficient\n\
                 covariance plus the pure curves' uncertainty (taken as uncorrelated).\n\
                 Composition keys as for m:density; arrays give vectors.\n{range}\n{FITTED_ONLY}"
            ),
            U_DENSITY_KEYS,
        ),
        (
            "mixture:pmv_u",
            "m:pmv_u{abm=…, t=…} → {v1=…, u1=…, v2=…, u2=…} (cm³/mol)",
            format!(
                "Partial molar volumes with standard uncertainties from the fit covariance\n\
                 (exact for the excess part, which is linear in the coefficients) plus the\n\
                 pure molar volumes' own uncertainty.\n{range}\n{FITTED_ONLY}"
            ),
            U_PROPERTY_KEYS,
        ),
        (
            "mixture:excess_volume_u",
            "m:excess_volume_u{abm=…, t=…} → {ve=…, u=…} (cm³/mol)",
            format!(
                "Excess molar volume with its standard uncertainty from the coefficient\n\
                 covariance (given the pure curves).\n{range}\n{FITTED_ONLY}"
            ),
            U_PROPERTY_KEYS,
        ),
        (
            "mixture:crosscheck",
            "m:crosscheck{x={…}, t=…[, t_tol=0.05, window=n]} → {x, v1, u1, v1_tangent, v2, u2, v2_tangent, rows, text}",
            format!(
                "The fitted partial molar volumes beside model-free ones: at each mole\n\
                 fraction x a quadratic through the molar volumes of the nearest data rows\n\
                 (within t_tol K of t) gives the tangent, whose intercepts at x = 1 and\n\
                 x = 0 are V̄₁ and V̄₂. Agreement within a few u says the data support the\n\
                 model's shape there. By default the number of rows is chosen at each x\n\
                 from the data: 3 to 12 nearest rows, grown while the tangents of the wider\n\
                 windows stay within the density scatter of the narrower ones (few rows\n\
                 where the grid is coarse or V_m bends sharply, more where it is dense).\n\
                 window = n fixes it at the n nearest rows (at least 3). c.rows gives the\n\
                 rows used at each x. print(c.text) shows the table. {FITTED_ONLY}"
            ),
            CROSSCHECK_KEYS,
        ),
        (
            "mixture:fit_info",
            "m:fit_info() → table",
            format!(
                "The fit as numbers: terms, t_order, t_center, coefficients[k+1][j+1] =\n\
                 a_kj (cm³/mol/K^j), u_coefficients, data_range, rows, source, date, pure1\n\
                 and pure2 (t0, coefficients, origin), residual_sd (kg/m³), residual_sd_ve,\n\
                 dof, condition_number, weighted, birge_ratio, outliers (row numbers),\n\
                 warnings. {FITTED_ONLY}"
            ),
            &[],
        ),
        (
            "mixture:fit_data",
            "m:fit_data() → {w=…, density=…, t=…[, u_density=…]}",
            format!(
                "The data rows the model was fitted to, as columns (w the mass fraction\n\
                 of the first component). {FITTED_ONLY}"
            ),
            &[],
        ),
    ]
}
