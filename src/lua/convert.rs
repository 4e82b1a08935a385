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

use mlua::{Lua, Table, Value};

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

/// A Lua sequence of finite numbers as a `Vec`, checked in one pass over
/// the table: every key must be an integer 1..n (n the table's length) and
/// every value a finite number, and all n must be present.
pub fn table_numbers(lua: &Lua, t: &Table, func: &str, arg: &str) -> mlua::Result<Vec<f64>> {
    let n = t.raw_len();
    limits::check_alloc(lua, func, n)?;
    // NaN marks "not yet seen": NaN values themselves are refused below.
    let mut data = vec![f64::NAN; n];
    let mut count = 0usize;
    t.for_each::<Value, Value>(|k, v| {
        let i = match k {
            Value::Integer(i) if i >= 1 && (i as u64) <= n as u64 => i as usize,
            Value::Integer(i) if i >= 1 => {
                let hole = data
                    .iter()
                    .position(|x| x.is_nan())
                    .map_or(n + 1, |p| p + 1);
                return Err(runtime(format!(
                    "{func}: {arg}[{hole}] is nil: the array has a hole before index {i}"
                )));
            }
            other => {
                let key = match &other {
                    Value::String(s) => format!("'{}'", s.to_string_lossy()),
                    v => super::format::format_nested(lua, v),
                };
                return Err(runtime(format!(
                    "{func}: {arg} must be an array of numbers, but it has the key {key}"
                )));
            }
        };
        data[i - 1] = match v {
            Value::Integer(x) => x as f64,
            Value::Number(x) if x.is_finite() => x,
            Value::Number(x) => {
                return Err(runtime(format!(
                    "{func}: {arg}[{i}] must be a finite number, got {x}"
                )))
            }
            other => {
                return Err(runtime(format!(
                    "{func}: {arg}[{i}] must be a number, got {}",
                    describe_value(&other)
                )))
            }
        };
        count += 1;
        Ok(())
    })?;
    if count != n {
        let hole = data.iter().position(|x| x.is_nan()).map_or(0, |p| p + 1);
        return Err(runtime(format!(
            "{func}: {arg}[{hole}] is nil: the array has a hole"
        )));
    }
    Ok(data)
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

/// The named arguments of a keyword-table call such as
/// `m:density{abv = 40, t = 20}`, checked against the keys the function
/// accepts.
#[derive(Debug)]
pub struct Fields {
    func: String,
    allowed: &'static [&'static str],
    values: Vec<Option<Value>>,
}

impl Fields {
    /// Reads `v`, which must be a table whose keys are all in `allowed`;
    /// `example` shows a correct call in the error for a non-table.
    pub fn read(
        v: &Value,
        func: &str,
        allowed: &'static [&'static str],
        example: &str,
    ) -> mlua::Result<Fields> {
        let Value::Table(t) = v else {
            return Err(runtime(format!(
                "{func}: expected a table of named values like {example}, got {}",
                describe_value(v)
            )));
        };
        let mut values: Vec<Option<Value>> = vec![None; allowed.len()];
        t.for_each::<Value, Value>(|k, v| {
            let pos = match &k {
                Value::String(s) => {
                    let b = s.as_bytes();
                    allowed.iter().position(|a| a.as_bytes() == &*b)
                }
                _ => None,
            };
            match pos {
                Some(p) => {
                    values[p] = Some(v);
                    Ok(())
                }
                None => Err(runtime(format!(
                    "{func}: unknown key {} (accepted: {})",
                    match &k {
                        Value::String(s) => format!("'{}'", s.to_string_lossy()),
                        Value::Integer(i) => {
                            format!("[{i}]; give values by name, like {example}")
                        }
                        other => describe_value(other),
                    },
                    allowed.join(", ")
                ))),
            }
        })?;
        Ok(Fields {
            func: func.to_string(),
            allowed,
            values,
        })
    }

    /// The function name used in messages.
    pub fn func(&self) -> &str {
        &self.func
    }

    /// The value given for `key`, if any (`key` must be an accepted key).
    pub fn get(&self, key: &str) -> Option<&Value> {
        let p = self.allowed.iter().position(|a| *a == key)?;
        self.values[p].as_ref()
    }

    /// Whether `key` was given.
    pub fn has(&self, key: &str) -> bool {
        self.get(key).is_some()
    }

    /// The given keys among `keys`, in the order of `keys`.
    pub fn present<'k>(&self, keys: &[&'k str]) -> Vec<&'k str> {
        keys.iter().copied().filter(|k| self.has(k)).collect()
    }

    /// A numeric argument (number, array or vector), if given.
    pub fn numbers(&self, lua: &Lua, key: &str) -> mlua::Result<Option<Numbers>> {
        match self.get(key) {
            None => Ok(None),
            Some(v) => numbers(lua, v, &self.func, key).map(Some),
        }
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
    let given = fields.present(keys);
    let key = match given.as_slice() {
        [k] => *k,
        [] => {
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
        many => {
            return Err(runtime(format!(
                "{func}: give exactly one composition key, got {} ({})",
                many.len(),
                many.join(", ")
            )))
        }
    };
    let basis = BASES[COMPOSITION_KEYS.iter().position(|k| *k == key).unwrap_or(0)];
    let value = fields.required(lua, key, "the composition")?;
    if fields.has("t_ref") && basis != Basis::Abv {
        return Err(runtime(format!(
            "{func}: t_ref (the reference temperature of % vol) only goes with abv"
        )));
    }
    let t_ref = fields.numbers_or(lua, "t_ref", kernel::T_REF_C)?;
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
