//! The numeric vector: a Rust-owned array of f64 that bulk calls return and
//! accept, so a million points never become a million Lua values.
//!
//! Lua side: `vec{…}`, `range(from, to [, step])`, `linspace(a, b, n)`;
//! `#v`, `v[i]` (1-based, out of range is an error), `v[i] = x`, `ipairs`
//! and `pairs`, `+ - * /` and unary minus with vectors and numbers,
//! `v:totable()`, `v:sum()`, `v:min()`, `v:max()`, `v:mean()`, `v:len()`.
//! Every allocation is checked and counted against the host's memory limit
//! (Lua cannot see Rust memory).

use mlua::{AnyUserData, Function, Lua, MetaMethod, UserData, UserDataMethods, Value};

use super::convert::{describe_value, number, table_numbers};
use super::errors::runtime;
use super::format::fmt_vector;
use super::help::{add_help, tag};
use super::limits::{check_alloc, Allocation};

/// A vector of finite or non-finite f64 values held in Rust.
#[derive(Debug)]
pub struct Vector {
    data: Vec<f64>,
    _alloc: Allocation,
}

impl Vector {
    /// Wraps `data`, checking it against the memory limit and counting it.
    pub fn new(lua: &Lua, data: Vec<f64>) -> mlua::Result<Vector> {
        check_alloc(lua, "vector", data.len())?;
        let alloc = Allocation::new(lua, data.len());
        Ok(Vector {
            data,
            _alloc: alloc,
        })
    }

    /// The values.
    pub fn as_slice(&self) -> &[f64] {
        &self.data
    }

    /// Number of values.
    pub fn len(&self) -> usize {
        self.data.len()
    }

    /// Whether there are no values.
    pub fn is_empty(&self) -> bool {
        self.data.is_empty()
    }
}

/// A new vector userdata holding `data`.
pub fn create(lua: &Lua, data: Vec<f64>) -> mlua::Result<AnyUserData> {
    lua.create_userdata(Vector::new(lua, data)?)
}

/// An operand of vector arithmetic.
enum Operand {
    Scalar(f64),
    Vector(AnyUserData),
}

fn operand(v: &Value, op: &str) -> mlua::Result<Operand> {
    match v {
        Value::Integer(i) => Ok(Operand::Scalar(*i as f64)),
        Value::Number(x) => Ok(Operand::Scalar(*x)),
        Value::UserData(ud) if ud.is::<Vector>() => Ok(Operand::Vector(ud.clone())),
        other => Err(runtime(format!(
            "vector {op}: operands must be vectors or numbers, got {}{}",
            describe_value(other),
            if other.is_table() {
                " (wrap a table with vec{…})"
            } else {
                ""
            }
        ))),
    }
}

fn arith(
    lua: &Lua,
    a: &Value,
    b: &Value,
    op: &str,
    f: fn(f64, f64) -> f64,
) -> mlua::Result<AnyUserData> {
    let out = match (operand(a, op)?, operand(b, op)?) {
        (Operand::Vector(x), Operand::Vector(y)) => {
            let (x, y) = (x.borrow::<Vector>()?, y.borrow::<Vector>()?);
            if x.len() != y.len() {
                return Err(runtime(format!(
                    "vector {op}: lengths differ ({} and {})",
                    x.len(),
                    y.len()
                )));
            }
            check_alloc(lua, "vector", x.len())?;
            x.data.iter().zip(&y.data).map(|(p, q)| f(*p, *q)).collect()
        }
        (Operand::Vector(x), Operand::Scalar(s)) => {
            let x = x.borrow::<Vector>()?;
            check_alloc(lua, "vector", x.len())?;
            x.data.iter().map(|p| f(*p, s)).collect()
        }
        (Operand::Scalar(s), Operand::Vector(y)) => {
            let y = y.borrow::<Vector>()?;
            check_alloc(lua, "vector", y.len())?;
            y.data.iter().map(|q| f(s, *q)).collect()
        }
        (Operand::Scalar(_), Operand::Scalar(_)) => {
            return Err(runtime(format!("vector {op}: no vector operand")))
        }
    };
    create(lua, out)
}

fn index_of(v: &Vector, key: &Value) -> mlua::Result<usize> {
    let i = match key {
        Value::Integer(i) => *i,
        Value::Number(x) if x.fract() == 0.0 && x.abs() < 9.0e15 => *x as i64,
        Value::String(s) => {
            return Err(runtime(format!(
                "vector has no field '{}' (methods: {})",
                s.to_string_lossy(),
                METHODS.join(", ")
            )))
        }
        other => {
            return Err(runtime(format!(
                "vector index must be an integer, got {}",
                describe_value(other)
            )))
        }
    };
    if i < 1 || i as u64 > v.len() as u64 {
        return Err(runtime(format!(
            "vector index {i} is out of range 1..{}",
            v.len()
        )));
    }
    Ok(i as usize - 1)
}

/// Method names, for messages and completion.
pub const METHODS: [&str; 6] = ["totable", "sum", "min", "max", "mean", "len"];

impl UserData for Vector {
    fn add_methods<M: UserDataMethods<Self>>(methods: &mut M) {
        methods.add_method("totable", |lua, this, ()| {
            let t = lua.create_table_with_capacity(this.len(), 0)?;
            for (i, x) in this.data.iter().enumerate() {
                t.raw_set(i + 1, *x)?;
            }
            Ok(t)
        });
        methods.add_method("sum", |_, this, ()| Ok(this.data.iter().sum::<f64>()));
        methods.add_method("len", |_, this, ()| Ok(this.len()));
        methods.add_method("min", |_, this, ()| {
            Ok(this.data.iter().copied().reduce(f64::min))
        });
        methods.add_method("max", |_, this, ()| {
            Ok(this.data.iter().copied().reduce(f64::max))
        });
        methods.add_method("mean", |_, this, ()| {
            Ok((!this.is_empty()).then(|| this.data.iter().sum::<f64>() / this.len() as f64))
        });
        methods.add_meta_method(MetaMethod::Len, |_, this, ()| Ok(this.len()));
        methods.add_meta_method(MetaMethod::Index, |_, this, key: Value| {
            Ok(this.data[index_of(this, &key)?])
        });
        methods.add_meta_method_mut(
            MetaMethod::NewIndex,
            |_, this, (key, val): (Value, Value)| {
                let i = index_of(this, &key)?;
                this.data[i] = number(&val, "vector", &format!("element [{}]", i + 1))?;
                Ok(())
            },
        );
        methods.add_meta_method(MetaMethod::ToString, |_, this, ()| {
            Ok(fmt_vector(&this.data))
        });
        methods.add_meta_function(MetaMethod::Add, |lua, (a, b): (Value, Value)| {
            arith(lua, &a, &b, "+", |x, y| x + y)
        });
        methods.add_meta_function(MetaMethod::Sub, |lua, (a, b): (Value, Value)| {
            arith(lua, &a, &b, "-", |x, y| x - y)
        });
        methods.add_meta_function(MetaMethod::Mul, |lua, (a, b): (Value, Value)| {
            arith(lua, &a, &b, "*", |x, y| x * y)
        });
        methods.add_meta_function(MetaMethod::Div, |lua, (a, b): (Value, Value)| {
            arith(lua, &a, &b, "/", |x, y| x / y)
        });
        methods.add_meta_method(MetaMethod::Unm, |lua, this, ()| {
            check_alloc(lua, "vector", this.len())?;
            create(lua, this.data.iter().map(|x| -x).collect())
        });
        methods.add_meta_function(
            MetaMethod::Eq,
            |_, (a, b): (AnyUserData, AnyUserData)| match (
                a.borrow::<Vector>(),
                b.borrow::<Vector>(),
            ) {
                (Ok(a), Ok(b)) => Ok(a.data == b.data),
                _ => Ok(false),
            },
        );
        methods.add_meta_function(MetaMethod::Pairs, |lua, v: AnyUserData| {
            Ok((iterator(lua)?, v, 0))
        });
    }
}

const KEY_ITER: &str = "meniscus.vector.iter";

/// The stateless iterator `(v, i) → i + 1, v[i + 1]` used by `ipairs(v)` and
/// `pairs(v)`.
pub fn iterator(lua: &Lua) -> mlua::Result<Function> {
    if let Ok(f) = lua.named_registry_value::<Function>(KEY_ITER) {
        return Ok(f);
    }
    let f = lua.create_function(|_, (v, i): (AnyUserData, i64)| {
        let v = v.borrow::<Vector>()?;
        let next = i + 1;
        if next >= 1 && (next as u64) <= v.len() as u64 {
            Ok((Some(next), Some(v.data[next as usize - 1])))
        } else {
            Ok((None, None))
        }
    })?;
    lua.set_named_registry_value(KEY_ITER, f.clone())?;
    Ok(f)
}

/// The values of `range(from, to, step)`: from, from + step, … up to and
/// including `to` (within rounding), like a numeric `for`.
fn range_values(lua: &Lua, from: f64, to: f64, step: f64) -> mlua::Result<Vec<f64>> {
    if step == 0.0 {
        return Err(runtime("range: step must not be zero"));
    }
    let span = (to - from) / step;
    if span < 0.0 {
        return Ok(Vec::new());
    }
    // Tolerate rounding so that range(0, 1, 0.1) includes 1.
    let count = (span + 1e-9 * span.max(1.0)).floor() + 1.0;
    if count > super::limits::MAX_VECTOR_LEN as f64 {
        return Err(runtime(format!(
            "range: {count} values is more than the {} a vector may hold",
            super::limits::MAX_VECTOR_LEN
        )));
    }
    let n = count as usize;
    check_alloc(lua, "range", n)?;
    Ok((0..n).map(|i| from + step * i as f64).collect())
}

fn linspace_values(lua: &Lua, a: f64, b: f64, n: &Value) -> mlua::Result<Vec<f64>> {
    let n = match n {
        Value::Integer(i) => *i,
        Value::Number(x) if x.fract() == 0.0 && x.abs() < 9.0e15 => *x as i64,
        other => {
            return Err(runtime(format!(
                "linspace: n must be a whole number of points, got {}",
                describe_value(other)
            )))
        }
    };
    if n < 1 {
        return Err(runtime(format!("linspace: n must be at least 1, got {n}")));
    }
    if n as u64 > super::limits::MAX_VECTOR_LEN as u64 {
        return Err(runtime(format!(
            "linspace: {n} values is more than the {} a vector may hold",
            super::limits::MAX_VECTOR_LEN
        )));
    }
    let n = n as usize;
    check_alloc(lua, "linspace", n)?;
    if n == 1 {
        return Ok(vec![a]);
    }
    let step = (b - a) / (n - 1) as f64;
    Ok((0..n)
        .map(|i| if i == n - 1 { b } else { a + step * i as f64 })
        .collect())
}

/// Registers `vec`, `range` and `linspace` and their help.
pub fn register(lua: &Lua) -> mlua::Result<()> {
    let g = lua.globals();
    g.set(
        "vec",
        lua.create_function(|lua, v: Value| {
            let data = match &v {
                Value::Table(t) => table_numbers(lua, t, "vec", "values")?,
                Value::UserData(ud) if ud.is::<Vector>() => {
                    let src = ud.borrow::<Vector>()?;
                    check_alloc(lua, "vec", src.len())?;
                    src.data.clone()
                }
                Value::Nil => Vec::new(),
                other => {
                    return Err(runtime(format!(
                        "vec: expected a table of numbers like vec{{1, 2, 3}}, got {}",
                        describe_value(other)
                    )))
                }
            };
            create(lua, data)
        })?,
    )?;
    g.set(
        "range",
        lua.create_function(|lua, (from, to, step): (Value, Value, Option<Value>)| {
            let from = number(&from, "range", "from")?;
            let to = number(&to, "range", "to")?;
            let step = match step {
                None | Some(Value::Nil) => 1.0,
                Some(s) => number(&s, "range", "step")?,
            };
            let data = range_values(lua, from, to, step)?;
            create(lua, data)
        })?,
    )?;
    g.set(
        "linspace",
        lua.create_function(|lua, (a, b, n): (Value, Value, Value)| {
            let a = number(&a, "linspace", "a")?;
            let b = number(&b, "linspace", "b")?;
            let data = linspace_values(lua, a, b, &n)?;
            create(lua, data)
        })?,
    )?;

    for name in ["vec", "range", "linspace"] {
        let f: Value = g.get(name)?;
        tag(lua, f, name)?;
    }
    add_help(
        lua,
        "vec",
        "vec{x1, x2, …} → vector",
        "A numeric vector from a table of numbers (or a copy of a vector).\n\
         Vectors hold numbers in Rust memory: bulk calls accept and return them.\n\
         #v, v[i] (1-based; out of range is an error), v[i] = x, ipairs(v),\n\
         + - * / with vectors of the same length and with numbers, -v.\n\
         Methods: v:totable(), v:sum(), v:min(), v:max(), v:mean(), v:len().",
    )?;
    add_help(
        lua,
        "range",
        "range(from, to [, step]) → vector",
        "from, from+step, … up to and including to (within rounding), like a\n\
         numeric for loop; step defaults to 1. Empty when step points away\n\
         from to. At most 10^8 values, and within the memory limit.",
    )?;
    add_help(
        lua,
        "linspace",
        "linspace(a, b, n) → vector",
        "n evenly spaced values from a to b inclusive.",
    )?;
    add_help(
        lua,
        "vector",
        "vector (type)",
        "A numeric vector returned by vec, range, linspace and bulk calls.\n\
         #v, v[i], ipairs(v), arithmetic with + - * / and numbers.\n\
         Methods: totable, sum, min, max, mean, len.",
    )?;
    for (name, sig, doc) in [
        (
            "totable",
            "v:totable() → table",
            "The values as a Lua table (sequence).",
        ),
        (
            "sum",
            "v:sum() → number",
            "Sum of the values (0 for an empty vector).",
        ),
        (
            "min",
            "v:min() → number",
            "Smallest value (nil for an empty vector).",
        ),
        (
            "max",
            "v:max() → number",
            "Largest value (nil for an empty vector).",
        ),
        (
            "mean",
            "v:mean() → number",
            "Arithmetic mean (nil for an empty vector).",
        ),
        (
            "len",
            "v:len() → integer",
            "Number of values, the same as #v.",
        ),
    ] {
        add_help(lua, &format!("vector:{name}"), sig, doc)?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn range_includes_the_end_despite_rounding() {
        let lua = Lua::new();
        let v = range_values(&lua, 0.0, 1.0, 0.1).unwrap();
        assert_eq!(v.len(), 11);
        assert!((v[10] - 1.0).abs() < 1e-12);
        assert_eq!(range_values(&lua, 1.0, 0.0, 1.0).unwrap().len(), 0);
        assert_eq!(
            range_values(&lua, 5.0, 1.0, -2.0).unwrap(),
            vec![5.0, 3.0, 1.0]
        );
        assert!(range_values(&lua, 0.0, 1.0, 0.0).is_err());
        assert!(range_values(&lua, 0.0, 1e12, 1.0).is_err());
    }

    #[test]
    fn linspace_hits_both_ends() {
        let lua = Lua::new();
        let v = linspace_values(&lua, 0.0, 100.0, &Value::Integer(11)).unwrap();
        assert_eq!(v.len(), 11);
        assert_eq!(v[0], 0.0);
        assert_eq!(v[10], 100.0);
        assert!(linspace_values(&lua, 0.0, 1.0, &Value::Number(2.5)).is_err());
        assert!(linspace_values(&lua, 0.0, 1.0, &Value::Integer(0)).is_err());
    }
}
