//! Conversion of Lua arguments to Rust values, in one place, with the
//! checks Lua itself does not make: a table of numbers with a hole, a
//! string such as `'3'`, NaN or an infinity is an error naming the function,
//! the argument and the index (mlua would silently truncate at the hole,
//! turn `'3'` into 3 and pass NaN through).
//!
//! Numeric arguments may be a number, a Lua sequence or a meniscus vector
//! ([`Numbers`]); [`bulk`] evaluates a kernel function element-wise over
//! such arguments with scalars broadcast, and returns numbers or vectors.
//! Keyword tables (`{abv = 40, t = 20}`) are read by [`Fields`], which
//! refuses unknown keys so that a typo is not silently ignored.

use mlua::{ffi, Lua, Table, Value};

use super::errors::runtime;
use super::limits;
use super::vector::{self, Vector};
use crate::kernel;

/// A short description of a Lua value for error messages: its type, and
/// the value itself when it is short.
pub fn describe_value(v: &Value) -> String {
    match v {
        Value::Nil => "nil".into(),
        Value::Boolean(b) => format!("boolean {b}"),
        Value::Integer(i) => format!("number {i}"),
        Value::Number(x) => format!("number {x}"),
        Value::String(s) => {
            let b = s.as_bytes();
            if b.len() <= 24 {
                format!("string {}", super::format::quote(&b))
            } else {
                "a string".into()
            }
        }
        Value::UserData(ud) if ud.is::<Vector>() => "a vector".into(),
        other => format!("a {}", other.type_name()),
    }
}

/// A scalar number argument: an integer or a finite float (not a string).
pub fn number(v: &Value, func: &str, arg: &str) -> mlua::Result<f64> {
    match v {
        Value::Integer(i) => Ok(*i as f64),
        Value::Number(x) if x.is_finite() => Ok(*x),
        Value::Number(x) => Err(runtime(format!(
            "{func}: {arg} must be a finite number, got {x}"
        ))),
        other => Err(runtime(format!(
            "{func}: {arg} must be a number, got {}",
            describe_value(other)
        ))),
    }
}

/// An optional scalar number argument (nil gives `None`).
pub fn opt_number(v: Option<&Value>, func: &str, arg: &str) -> mlua::Result<Option<f64>> {
    match v {
        None | Some(Value::Nil) => Ok(None),
        Some(v) => number(v, func, arg).map(Some),
    }
}

/// A numeric argument that may be one number or many.
#[derive(Debug, Clone, PartialEq)]
pub enum Numbers {
    /// One number, broadcast against arrays.
    One(f64),
    /// An array (from a Lua sequence or a vector).
    Many(Vec<f64>),
}

impl Numbers {
    /// The array length, `None` for a scalar.
    pub fn len(&self) -> Option<usize> {
        match self {
            Numbers::One(_) => None,
            Numbers::Many(v) => Some(v.len()),
        }
    }

    /// Whether this is an empty array.
    pub fn is_empty(&self) -> bool {
        matches!(self, Numbers::Many(v) if v.is_empty())
    }

    /// Element `i` (the scalar for any `i`).
    #[inline]
    pub fn at(&self, i: usize) -> f64 {
        match self {
            Numbers::One(x) => *x,
            Numbers::Many(v) => v[i],
        }
    }
}

/// A number, a sequence of numbers or a vector.
pub fn numbers(lua: &Lua, v: &Value, func: &str, arg: &str) -> mlua::Result<Numbers> {
    match v {
        Value::Table(t) => table_numbers(lua, t, func, arg).map(Numbers::Many),
        Value::UserData(ud) if ud.is::<Vector>() => {
            let vec = ud.borrow::<Vector>()?;
            check_finite(vec.as_slice(), func, arg)?;
            limits::check_alloc(lua, func, vec.len())?;
            Ok(Numbers::Many(vec.as_slice().to_vec()))
        }
        Value::Integer(_) | Value::Number(_) => number(v, func, arg).map(Numbers::One),
        other => Err(runtime(format!(
            "{func}: {arg} must be a number, an array of numbers or a vector, got {}",
            describe_value(other)
        ))),
    }
}

fn check_finite(data: &[f64], func: &str, arg: &str) -> mlua::Result<()> {
    match data.iter().position(|x| !x.is_finite()) {
        None => Ok(()),
        Some(i) => Err(runtime(format!(
            "{func}: {arg}[{}] must be a finite number, got {}",
            i + 1,
            data[i]
        ))),
    }
}

/// A Lua sequence of finite numbers as a `Vec`, checked in one raw pass
/// over the table: every key must be an integer 1..n (n the table's
/// length), every value a finite number (not a string), and all n present.
pub fn table_numbers(lua: &Lua, t: &Table, func: &str, arg: &str) -> mlua::Result<Vec<f64>> {
    let n = t.raw_len();
    limits::check_alloc(lua, func, n)?;
    // NaN marks "not yet seen": NaN values themselves are refused.
    let mut data = vec![f64::NAN; n];
    let mut count = 0usize;
    let mut issue: Option<ScanIssue> = None;
    // SAFETY (of the raw calls): as in `Fields::read`; indexing checked.
    scan_table(lua, t, |state, tix| unsafe {
        ffi::lua_pushnil(state);
        while ffi::lua_next(state, tix) != 0 {
            // The common case in few API calls; anything unusual is
            // classified by `classify_element` on the way out.
            let mut isnum = 0;
            let ok = ffi::lua_type(state, -2) == ffi::LUA_TNUMBER && {
                let k = ffi::lua_tointegerx(state, -2, &mut isnum);
                isnum != 0
                    && ffi::lua_type(state, -1) == ffi::LUA_TNUMBER
                    && match data.get_mut((k as usize).wrapping_sub(1)) {
                        Some(slot) => {
                            let x = ffi::lua_tonumberx(state, -1, std::ptr::null_mut());
                            *slot = x;
                            x.is_finite()
                        }
                        None => false,
                    }
            };
            if !ok {
                issue = Some(classify_element(state, n));
                break;
            }
            count += 1;
            ffi::lua_settop(state, -2);
        }
    })?;
    let first_hole = |data: &[f64]| {
        data.iter()
            .position(|x| x.is_nan())
            .map_or(n + 1, |p| p + 1)
    };
    match issue {
        None if count == n => Ok(data),
        None => Err(runtime(format!(
            "{func}: {arg}[{}] is nil: the array has a hole",
            first_hole(&data)
        ))),
        Some(ScanIssue::Beyond { key }) => Err(runtime(format!(
            "{func}: {arg}[{}] is nil: the array has a hole before index {key}",
            first_hole(&data)
        ))),
        Some(ScanIssue::UnknownKey(k)) => Err(runtime(format!(
            "{func}: {arg} must be an array of numbers, but it has the key {k}"
        ))),
        Some(ScanIssue::IntegerKey(k)) => Err(runtime(format!(
            "{func}: {arg} must be an array of numbers, but it has the key [{k}]"
        ))),
        Some(ScanIssue::NotFinite { index, value }) => Err(runtime(format!(
            "{func}: {arg}[{index}] must be a finite number, got {value}"
        ))),
        Some(ScanIssue::NotNumber { index, got }) => Err(runtime(format!(
            "{func}: {arg}[{index}] must be a number, got {got}"
        ))),
    }
}

/// The common length of array arguments (`None` when all are scalars);
/// arrays of different lengths are an error naming both.
pub fn common_len(func: &str, args: &[(&str, &Numbers)]) -> mlua::Result<Option<usize>> {
    let mut found: Option<(&str, usize)> = None;
    for (name, a) in args {
        if let Some(len) = a.len() {
            match found {
                None => found = Some((name, len)),
                Some((first, n)) if n != len => {
                    return Err(runtime(format!(
                        "{func}: {first} has {n} values but {name} has {len}; arrays must have the same length"
                    )))
                }
                _ => {}
            }
        }
    }
    Ok(found.map(|(_, n)| n))
}

/// Results of a [`bulk`] evaluation: numbers, or one vector per output.
pub enum Bulk<const K: usize> {
    /// Every input was a scalar.
    Scalars([f64; K]),
    /// At least one input was an array.
    Vectors([Vec<f64>; K]),
}

impl<const K: usize> Bulk<K> {
    /// The outputs as Lua values (numbers or vectors).
    pub fn into_values(self, lua: &Lua) -> mlua::Result<[Value; K]> {
        match self {
            Bulk::Scalars(xs) => Ok(xs.map(Value::Number)),
            Bulk::Vectors(vs) => {
                let mut out: [Value; K] = std::array::from_fn(|_| Value::Nil);
                for (o, v) in out.iter_mut().zip(vs) {
                    *o = Value::UserData(vector::create(lua, v)?);
                }
                Ok(out)
            }
        }
    }
}

/// Evaluates `f` element-wise over `inputs` (scalars broadcast), `f`
/// receiving one value per input in order. A kernel error stops the whole
/// call and names the function and, for arrays, the 1-based index.
pub fn bulk<const K: usize>(
    lua: &Lua,
    func: &str,
    inputs: &[(&str, &Numbers)],
    mut f: impl FnMut(&[f64]) -> kernel::Result<[f64; K]>,
) -> mlua::Result<Bulk<K>> {
    const MAX_INPUTS: usize = 8;
    assert!(inputs.len() <= MAX_INPUTS, "bulk: too many inputs");
    let m = inputs.len();
    let mut xs = [0.0f64; MAX_INPUTS];
    match common_len(func, inputs)? {
        None => {
            for (j, (_, a)) in inputs.iter().enumerate() {
                xs[j] = a.at(0);
            }
            let r = f(&xs[..m]).map_err(|e| runtime(format!("{func}: {e}")))?;
            Ok(Bulk::Scalars(r))
        }
        Some(n) => {
            limits::check_alloc(lua, func, n.saturating_mul(K))?;
            let mut outs: [Vec<f64>; K] = std::array::from_fn(|_| Vec::with_capacity(n));
            for i in 0..n {
                for (j, (_, a)) in inputs.iter().enumerate() {
                    xs[j] = a.at(i);
                }
                let r =
                    f(&xs[..m]).map_err(|e| runtime(format!("{func}: at index {}: {e}", i + 1)))?;
                for (o, v) in outs.iter_mut().zip(r) {
                    o.push(v);
                }
            }
            Ok(Bulk::Vectors(outs))
        }
    }
}

/// Most keys a keyword table may accept.
pub const MAX_FIELDS: usize = 16;

/// What a keyword table holds under one accepted key.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Slot {
    Absent,
    /// A number (possibly NaN or infinite: checked when used).
    Num(f64),
    /// Anything else: fetched from the table when used.
    Other,
}

/// The named arguments of a keyword-table call such as
/// `m:density{abv = 40, t = 20}`, checked against the keys the function
/// accepts. The table is read in one raw pass; numbers are kept as they
/// are and other values (arrays, vectors, wrong types) fetched when asked
/// for, so a scalar call allocates nothing.
#[derive(Debug)]
pub struct Fields<'f> {
    func: &'f str,
    allowed: &'static [&'static str],
    table: Table,
    slots: [Slot; MAX_FIELDS],
}

/// Why a raw table scan stopped.
enum ScanIssue {
    UnknownKey(String),
    IntegerKey(i64),
    NotNumber { index: usize, got: String },
    NotFinite { index: usize, value: f64 },
    Beyond { key: i64 },
}

/// Runs `f` with `t` pushed on the running thread's Lua stack (`f` gets
/// the state and the table's absolute index) and restores the stack.
///
/// This reads tables without the protected call (`lua_pcall`) that
/// `Lua::exec_raw` and `Table::for_each` make, which costs more than the
/// scan itself for a small keyword table. It relies on `f` calling only
/// Lua API functions that cannot raise an error: `lua_next` given back the
/// key it returned, `lua_type`, `lua_to*` on values of the right type, and
/// `lua_pop`. `exec_raw_lua` is mlua 0.12's (doc-hidden) raw access: check
/// it on upgrade (see reliability.md).
fn scan_table<R>(
    lua: &Lua,
    t: &Table,
    f: impl FnOnce(*mut ffi::lua_State, std::os::raw::c_int) -> R,
) -> mlua::Result<R> {
    lua.exec_raw_lua(|raw| {
        let state = raw.state();
        // SAFETY: `state` is the live state of the locked Lua; the stack
        // is checked for room, and put back to its height whatever `f`
        // leaves on it.
        unsafe {
            let top = ffi::lua_gettop(state);
            if ffi::lua_checkstack(state, 4) == 0 {
                return Err(runtime("Lua stack exhausted"));
            }
            raw.push(t)?;
            let idx = ffi::lua_gettop(state);
            let r = f(state, idx);
            ffi::lua_settop(state, top);
            Ok(r)
        }
    })
}

/// Describes the value at `idx` of the Lua stack without converting it.
///
/// # Safety
/// `idx` must be a valid index of `state`'s stack.
unsafe fn describe_raw(state: *mut ffi::lua_State, idx: std::os::raw::c_int) -> String {
    match ffi::lua_type(state, idx) {
        ffi::LUA_TNIL => "nil".into(),
        ffi::LUA_TBOOLEAN => format!("boolean {}", ffi::lua_toboolean(state, idx) != 0),
        ffi::LUA_TNUMBER => format!(
            "number {}",
            ffi::lua_tonumberx(state, idx, std::ptr::null_mut())
        ),
        ffi::LUA_TSTRING => {
            let mut len = 0usize;
            let p = ffi::lua_tolstring(state, idx, &mut len);
            if p.is_null() || len > 24 {
                "a string".into()
            } else {
                let b = std::slice::from_raw_parts(p as *const u8, len);
                format!("string {}", super::format::quote(b))
            }
        }
        t => {
            let name = ffi::lua_typename(state, t);
            if name.is_null() {
                "a value".into()
            } else {
                format!("a {}", std::ffi::CStr::from_ptr(name).to_string_lossy())
            }
        }
    }
}

/// Why the table entry on top of the stack (key at -2, value at -1) is
/// not element of an n-long array of finite numbers.
///
/// # Safety
/// The stack must hold a key and a value from `lua_next`.
#[cold]
unsafe fn classify_element(state: *mut ffi::lua_State, n: usize) -> ScanIssue {
    if ffi::lua_isinteger(state, -2) == 0 {
        return ScanIssue::UnknownKey(if ffi::lua_type(state, -2) == ffi::LUA_TSTRING {
            let mut len = 0usize;
            let p = ffi::lua_tolstring(state, -2, &mut len);
            let b = std::slice::from_raw_parts(p as *const u8, len);
            format!("'{}'", String::from_utf8_lossy(b))
        } else {
            describe_raw(state, -2)
        });
    }
    let key = ffi::lua_tointegerx(state, -2, std::ptr::null_mut());
    if key < 1 {
        return ScanIssue::IntegerKey(key);
    }
    if key as u64 > n as u64 {
        return ScanIssue::Beyond { key };
    }
    if ffi::lua_type(state, -1) == ffi::LUA_TNUMBER {
        ScanIssue::NotFinite {
            index: key as usize,
            value: ffi::lua_tonumberx(state, -1, std::ptr::null_mut()),
        }
    } else {
        ScanIssue::NotNumber {
            index: key as usize,
            got: describe_raw(state, -1),
        }
    }
}

impl<'f> Fields<'f> {
    /// Reads `v`, which must be a table whose keys are all in `allowed`
    /// (at most [`MAX_FIELDS`]); `example` shows a correct call in the
    /// error for a non-table or an unknown key.
    pub fn read(
        lua: &Lua,
        v: &Value,
        func: &'f str,
        allowed: &'static [&'static str],
        example: &str,
    ) -> mlua::Result<Fields<'f>> {
        assert!(allowed.len() <= MAX_FIELDS, "Fields: too many keys");
        let Value::Table(t) = v else {
            return Err(runtime(format!(
                "{func}: expected a table of named values like {example}, got {}",
                describe_value(v)
            )));
        };
        let mut slots = [Slot::Absent; MAX_FIELDS];
        let mut issue: Option<ScanIssue> = None;
        // SAFETY (of the raw calls): only non-raising API calls; lua_next
        // is given back the key it returned; lua_tolstring is applied to
        // string keys only, so it never converts a key in place.
        scan_table(lua, t, |state, tix| unsafe {
            ffi::lua_pushnil(state);
            while ffi::lua_next(state, tix) != 0 {
                let pos = if ffi::lua_type(state, -2) == ffi::LUA_TSTRING {
                    let mut len = 0usize;
                    let p = ffi::lua_tolstring(state, -2, &mut len);
                    let key = std::slice::from_raw_parts(p as *const u8, len);
                    match allowed.iter().position(|a| a.as_bytes() == key) {
                        Some(p) => Some(p),
                        None => {
                            issue = Some(ScanIssue::UnknownKey(format!(
                                "'{}'",
                                String::from_utf8_lossy(key)
                            )));
                            None
                        }
                    }
                } else {
                    issue = Some(if ffi::lua_isinteger(state, -2) != 0 {
                        ScanIssue::IntegerKey(ffi::lua_tointegerx(state, -2, std::ptr::null_mut()))
                    } else {
                        ScanIssue::UnknownKey(describe_raw(state, -2))
                    });
                    None
                };
                let Some(pos) = pos else {
                    break;
                };
                let slot = if ffi::lua_type(state, -1) == ffi::LUA_TNUMBER {
                    Slot::Num(ffi::lua_tonumberx(state, -1, std::ptr::null_mut()))
                } else {
                    Slot::Other
                };
                if let Some(s) = slots.get_mut(pos) {
                    *s = slot;
                }
                ffi::lua_pop(state, 1);
            }
        })?;
        match issue {
            None => Ok(Fields {
                func,
                allowed,
                table: t.clone(),
                slots,
            }),
            Some(ScanIssue::UnknownKey(k)) => Err(runtime(format!(
                "{func}: unknown key {k} (accepted: {})",
                allowed.join(", ")
            ))),
            Some(ScanIssue::IntegerKey(i)) => Err(runtime(format!(
                "{func}: unknown key [{i}]; give values by name, like {example} (accepted: {})",
                allowed.join(", ")
            ))),
            Some(_) => Err(runtime(format!("{func}: cannot read the arguments"))),
        }
    }

    /// The function name used in messages.
    pub fn func(&self) -> &str {
        self.func
    }

    fn pos(&self, key: &str) -> Option<usize> {
        self.allowed.iter().position(|a| *a == key)
    }

    /// Whether `key` was given.
    pub fn has(&self, key: &str) -> bool {
        self.pos(key).is_some_and(|p| self.slots[p] != Slot::Absent)
    }

    /// The value given for `key`, if any.
    pub fn get(&self, key: &str) -> mlua::Result<Option<Value>> {
        match self.pos(key).map(|p| self.slots[p]) {
            None | Some(Slot::Absent) => Ok(None),
            Some(Slot::Num(x)) => Ok(Some(Value::Number(x))),
            Some(Slot::Other) => self.table.raw_get::<Value>(key).map(Some),
        }
    }

    /// The given keys among `keys`, in the order of `keys`.
    pub fn present<'k>(&self, keys: &[&'k str]) -> Vec<&'k str> {
        keys.iter().copied().filter(|k| self.has(k)).collect()
    }

    /// How many of `keys` were given, and the first of them.
    pub fn count_present<'k>(&self, keys: &[&'k str]) -> (usize, Option<&'k str>) {
        let mut n = 0;
        let mut first = None;
        for k in keys {
            if self.has(k) {
                n += 1;
                first.get_or_insert(*k);
            }
        }
        (n, first)
    }

    /// A numeric argument (number, array or vector), if given.
    pub fn numbers(&self, lua: &Lua, key: &str) -> mlua::Result<Option<Numbers>> {
        match self.pos(key) {
            Some(p) => self.numbers_at(lua, p),
            None => Ok(None),
        }
    }

    /// The accepted keys that were given, as (position, key).
    fn given(&self) -> impl Iterator<Item = (usize, &'static str)> + '_ {
        self.allowed
            .iter()
            .enumerate()
            .filter(|(p, _)| self.slots[*p] != Slot::Absent)
            .map(|(p, k)| (p, *k))
    }

    fn numbers_at(&self, lua: &Lua, p: usize) -> mlua::Result<Option<Numbers>> {
        let key = self.allowed[p];
        match self.slots[p] {
            Slot::Absent => Ok(None),
            Slot::Num(x) if x.is_finite() => Ok(Some(Numbers::One(x))),
            Slot::Num(x) => Err(runtime(format!(
                "{}: {key} must be a finite number, got {x}",
                self.func
            ))),
            Slot::Other => {
                let v: Value = self.table.raw_get(key)?;
                numbers(lua, &v, self.func, key).map(Some)
            }
        }
    }

    /// The common case of a composition call, read straight from the
    /// slots: every given key is a finite number, exactly one of them a
    /// composition key, `t_ref` only with `abv`, `t` present for a density,
    /// and no key besides the composition, `t` and `t_ref`. Returns
    /// (basis, value, t_ref, t) or `None`, in which case [`composition`]
    /// reads the arguments in full (and reports what is wrong). `allowed`
    /// must begin with [`COMPOSITION_KEYS`].
    pub fn scalar_composition(&self, allow_density: bool) -> Option<(Basis, f64, f64, f64)> {
        if self.allowed.len() < 6 || self.allowed[..6] != COMPOSITION_KEYS {
            return None;
        }
        let mut found = None;
        let (mut t, mut t_ref) = (None, None);
        for (p, slot) in self.slots[..self.allowed.len()].iter().enumerate() {
            let x = match slot {
                Slot::Absent => continue,
                Slot::Num(x) if x.is_finite() => *x,
                _ => return None,
            };
            if p < 6 {
                if found.is_some() || (p == 5 && !allow_density) {
                    return None;
                }
                found = Some((BASES[p], x));
            } else {
                match self.allowed[p] {
                    "t" => t = Some(x),
                    "t_ref" => t_ref = Some(x),
                    _ => return None,
                }
            }
        }
        let (basis, value) = found?;
        if t_ref.is_some() && basis != Basis::Abv {
            return None;
        }
        if basis == Basis::Density && t.is_none() {
            return None;
        }
        Some((
            basis,
            value,
            t_ref.unwrap_or(kernel::T_REF_C),
            t.unwrap_or(kernel::T_REF_C),
        ))
    }

    /// A numeric argument with a default.
    pub fn numbers_or(&self, lua: &Lua, key: &str, default: f64) -> mlua::Result<Numbers> {
        Ok(self.numbers(lua, key)?.unwrap_or(Numbers::One(default)))
    }

    /// A numeric argument that must be given; `hint` says what it is.
    pub fn required(&self, lua: &Lua, key: &str, hint: &str) -> mlua::Result<Numbers> {
        self.numbers(lua, key)?
            .ok_or_else(|| runtime(format!("{}: {key} is required ({hint})", self.func)))
    }

    /// An optional `true`/`false` argument (absent or nil gives `None`).
    pub fn opt_bool(&self, key: &str) -> mlua::Result<Option<bool>> {
        match self.get(key)?.as_ref() {
            None | Some(Value::Nil) => Ok(None),
            Some(Value::Boolean(b)) => Ok(Some(*b)),
            Some(other) => Err(runtime(format!(
                "{}: {key} must be true or false, got {}",
                self.func,
                describe_value(other)
            ))),
        }
    }
}

/// Composition bases, as keys of a composition table.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Basis {
    /// `w`, mass fraction of component 1.
    W,
    /// `abm`, % mass.
    Abm,
    /// `x`, mole fraction.
    X,
    /// `abv`, % vol at 20 °C (or at `t_ref`).
    Abv,
    /// `proof`, US proof.
    Proof,
    /// `density` with `t`, kg/m³ measured at t °C.
    Density,
}

/// The composition keys, in the order [`Basis`] lists them.
pub const COMPOSITION_KEYS: [&str; 6] = ["w", "abm", "x", "abv", "proof", "density"];

const BASES: [Basis; 6] = [
    Basis::W,
    Basis::Abm,
    Basis::X,
    Basis::Abv,
    Basis::Proof,
    Basis::Density,
];

/// A composition argument: one basis with its value(s), plus the
/// reference temperature of % vol and the temperature of a density.
#[derive(Debug, Clone)]
pub struct CompositionArg {
    /// Which key was given.
    pub basis: Basis,
    /// Its value(s).
    pub value: Numbers,
    /// `t_ref` for % vol (20 °C unless given).
    pub t_ref: Numbers,
    /// `t` of a density measurement (unused for other bases).
    pub t_meas: Numbers,
}

impl CompositionArg {
    /// The kernel composition for element values (value, t_ref, t_meas).
    #[inline]
    pub fn composition(basis: Basis, value: f64, t_ref: f64, t_meas: f64) -> kernel::Composition {
        use kernel::Composition as C;
        match basis {
            Basis::W => C::W(value),
            Basis::Abm => C::Abm(value),
            Basis::X => C::X(value),
            Basis::Abv => C::Abv { abv: value, t_ref },
            Basis::Proof => C::Proof(value),
            Basis::Density => C::Density {
                rho: value,
                t: t_meas,
            },
        }
    }
}

/// Reads the composition from `fields`: exactly one of the composition keys
/// (`density` needs `t`, its measurement temperature), and `t_ref` only
/// with `abv`. `allow_density` is false where a density makes no sense as
/// input (e.g. computing a density).
pub fn composition(
    lua: &Lua,
    fields: &Fields,
    allow_density: bool,
) -> mlua::Result<CompositionArg> {
    let func = fields.func();
    let keys: &[&str] = if allow_density {
        &COMPOSITION_KEYS
    } else {
        &COMPOSITION_KEYS[..5]
    };
    // One pass over the keys given (usually one or two).
    let mut count = 0;
    let mut found: Option<(usize, usize)> = None;
    for (p, k) in fields.given() {
        if let Some(b) = keys.iter().position(|c| *c == k) {
            count += 1;
            found.get_or_insert((p, b));
        }
    }
    let (pos, b) = match (count, found) {
        (1, Some(f)) => f,
        (0, _) => {
            let also = if fields.has("density") && !allow_density {
                " (a density is not accepted here)"
            } else {
                ""
            };
            return Err(runtime(format!(
                "{func}: give the composition with one of the keys {}{also}",
                keys.join(", ")
            )));
        }
        (n, _) => {
            return Err(runtime(format!(
                "{func}: give exactly one composition key, got {n} ({})",
                fields.present(keys).join(", ")
            )))
        }
    };
    let basis = BASES[b];
    let value = fields
        .numbers_at(lua, pos)?
        .ok_or_else(|| runtime(format!("{func}: the composition is missing")))?;
    let t_ref = match fields.numbers(lua, "t_ref")? {
        Some(_) if basis != Basis::Abv => {
            return Err(runtime(format!(
                "{func}: t_ref (the reference temperature of % vol) only goes with abv"
            )))
        }
        Some(t) => t,
        None => Numbers::One(kernel::T_REF_C),
    };
    let t_meas = if basis == Basis::Density {
        fields.required(
            lua,
            "t",
            "the temperature in °C at which the density was measured",
        )?
    } else {
        Numbers::One(kernel::T_REF_C)
    };
    Ok(CompositionArg {
        basis,
        value,
        t_ref,
        t_meas,
    })
}
