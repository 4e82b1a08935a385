//! The `mixture` namespace and the mixture userdata: every property of a
//! [`Mixture`] reached from Lua through keyword tables
//! (`m:density{abv = 40, t = 15}`), element-wise over arrays and vectors.
//!
//! The userdata holds an `Arc<dyn Mixture>`, so the reference equation and
//! any other model (a fitted mixture, a plugin's model) are the same Lua
//! type with the same methods: make one with [`mixture_userdata`].

use std::sync::Arc;

use mlua::{AnyUserData, Lua, MetaMethod, MultiValue, Table, UserData, UserDataMethods, Value};

use super::convert::{
    bulk, common_len, composition, describe_value, Basis, Bulk, CompositionArg, Fields, Numbers,
    COMPOSITION_KEYS,
};
use super::errors::runtime;
use super::help::{add_help, add_keys, tag};
use super::limits::check_alloc;
use crate::kernel::composition::x_from_w;
use crate::kernel::prepared::StrengthBases;
use crate::kernel::{self, EthanolWater, HydrometerScale, Mixture, GLASS_ALPHA};

/// The Lua userdata of a mixture model.
#[derive(Clone)]
pub struct MixtureUd(pub Arc<dyn Mixture>);

/// A mixture userdata for any model (the reference equation, a fitted
/// mixture, a plugin's model): all `m:…` methods work on it.
pub fn mixture_userdata(lua: &Lua, model: Arc<dyn Mixture>) -> mlua::Result<AnyUserData> {
    lua.create_userdata(MixtureUd(model))
}

/// The model behind a mixture argument, for functions of other namespaces
/// that take a mixture (`func` and `arg` name it in the error).
pub fn mixture_arg(v: &Value, func: &str, arg: &str) -> mlua::Result<Arc<dyn Mixture>> {
    match v {
        Value::UserData(ud) if ud.is::<MixtureUd>() => Ok(ud.borrow::<MixtureUd>()?.0.clone()),
        other => Err(runtime(format!(
            "{func}: {arg} must be a mixture (e.g. mixture.ethanol_water()), got {}",
            describe_value(other)
        ))),
    }
}

/// Tags mixture methods `mixture:<name>` for help and completion. Every
/// mixture userdata returns the same function values from its method
/// table, so tagging those of one sample tags them for all.
pub fn tag_methods(lua: &Lua, names: &[&str]) -> mlua::Result<()> {
    let sample = mixture_userdata(lua, Arc::new(EthanolWater::new()))?;
    let get: mlua::Function = lua
        .load("local u, k = ...; return u[k]")
        .set_name("=(meniscus)")
        .into_function()?;
    for name in names {
        let f: Value = get.call((sample.clone(), *name))?;
        tag(lua, f, &format!("mixture:{name}"))?;
    }
    Ok(())
}

/// Cautions shown with every calculation that may feed a legal decision.
pub const CAUTIONS: &str = "Results are calculations from a model, not a certified measurement.\n\
For excise, labelling and other legal declarations use the officially\n\
prescribed tables, instruments and procedures, and follow local\n\
regulations. High-strength ethanol is flammable.";

const DENSITY_KEYS: &[&str] = &["w", "abm", "x", "abv", "proof", "density", "t", "t_ref"];
const STRENGTH_KEYS: &[&str] = &[
    "w",
    "abm",
    "x",
    "abv",
    "proof",
    "density",
    "t",
    "t_ref",
    "u_density",
    "u_t",
];
const PROPERTY_KEYS: &[&str] = &["w", "abm", "x", "abv", "proof", "density", "t", "t_ref"];
const HYDROMETER_KEYS: &[&str] = &["abv", "proof", "t", "alpha"];
const VOLUME_AT_KEYS: &[&str] = &[
    "w", "abm", "x", "abv", "proof", "density", "t", "t_ref", "volume", "from", "to",
];
const MIX_KEYS: &[&str] = &["v1", "v2", "m1", "m2", "t"];

const STRENGTH_FIELDS: [&str; 5] = ["w", "abm", "x", "abv", "proof"];
const STRENGTH_U_FIELDS: [&str; 10] = [
    "w", "abm", "x", "abv", "proof", "u_w", "u_abm", "u_x", "u_abv", "u_proof",
];
const MIX_FIELDS: [&str; 6] = ["w", "abv", "mass", "volume_sum", "volume", "contraction"];

/// Method names, for completion and help.
pub const METHODS: [&str; 15] = [
    "density",
    "strength",
    "convert",
    "hydrometer",
    "molar_volume",
    "pmv",
    "excess_volume",
    "apparent_volume",
    "expansion",
    "volume_at",
    "mix",
    "components",
    "validity",
    "name",
    "describe",
];

fn key_of(b: Basis) -> &'static str {
    COMPOSITION_KEYS[b as usize]
}

fn table_of<const K: usize>(
    lua: &Lua,
    names: &[&str; K],
    values: [Value; K],
) -> mlua::Result<Table> {
    let t = lua.create_table_with_capacity(0, K)?;
    for (k, v) in names.iter().zip(values) {
        t.raw_set(*k, v)?;
    }
    Ok(t)
}

/// Mass fraction for one element of a composition argument. A mass
/// fraction is passed through unchecked: every consumer (density,
/// strength, volumetric properties) checks w against the model's range
/// itself, with the same message.
#[inline]
fn w_of(m: &dyn Mixture, basis: Basis, value: f64, t_ref: f64, t_meas: f64) -> kernel::Result<f64> {
    match basis {
        Basis::W => Ok(value),
        _ => m.mass_fraction(CompositionArg::composition(basis, value, t_ref, t_meas)),
    }
}

/// Mass fractions of a density array, solved in one slice call:
/// [`Mixture::w_from_density_slice`] is vectorised for the reference
/// equation and uses a prepared inverse for other models at one
/// temperature. `None` when the argument is not a density array (or its
/// temperatures do not match it in length, left for [`bulk`] to report).
/// A bad point is reported as [`bulk`] reports it: function, 1-based
/// index, the point solve's message.
fn solved_w(
    lua: &Lua,
    m: &dyn Mixture,
    c: &CompositionArg,
    func: &str,
) -> mlua::Result<Option<Numbers>> {
    let (Basis::Density, Numbers::Many(rho)) = (c.basis, &c.value) else {
        return Ok(None);
    };
    let n = rho.len();
    let repeated;
    let t: &[f64] = match &c.t_meas {
        Numbers::Many(t) if t.len() == n => t,
        Numbers::One(t) => {
            check_alloc(lua, func, n)?;
            repeated = vec![*t; n];
            &repeated
        }
        Numbers::Many(_) => return Ok(None),
    };
    check_alloc(lua, func, n)?;
    let mut w = vec![0.0; n];
    match m.w_from_density_slice(rho, t, &mut w) {
        Ok(()) => Ok(Some(Numbers::Many(w))),
        Err(kernel::Error::AtPoint { index, source }) => {
            Err(runtime(format!("{func}: at index {}: {source}", index + 1)))
        }
        Err(e) => Err(runtime(format!("{func}: {e}"))),
    }
}

/// The composition argument with a density array replaced by its solved
/// mass fractions (see [`solved_w`]), for element-wise evaluation.
fn with_solved<'a>(solved: &'a Option<Numbers>, c: &'a CompositionArg) -> (Basis, &'a Numbers) {
    match solved {
        Some(w) => (Basis::W, w),
        None => (c.basis, &c.value),
    }
}

/// Reads a composition plus a property temperature `t` (default 20 °C;
/// for a density it is also the measurement temperature).
fn comp_and_t(
    lua: &Lua,
    f: &Fields,
    allow_density: bool,
) -> mlua::Result<(CompositionArg, Numbers)> {
    let c = composition(lua, f, allow_density)?;
    let t = f.numbers_or(lua, "t", kernel::T_REF_C)?;
    Ok((c, t))
}

/// A one-output property of (w, t), e.g. molar volume.
fn property1(
    lua: &Lua,
    m: &dyn Mixture,
    arg: &Value,
    func: &str,
    allow_density: bool,
    keys: &'static [&'static str],
    prop: impl Fn(&dyn Mixture, f64, f64) -> kernel::Result<f64>,
) -> mlua::Result<Value> {
    let f = Fields::read(lua, arg, func, keys, "{abv = 40, t = 20}")?;
    if let Some((basis, value, t_ref, t)) = f.scalar_composition(allow_density) {
        // For a density, t is both its measurement temperature and the
        // temperature of the property.
        let r = w_of(m, basis, value, t_ref, t).and_then(|w| prop(m, w, t));
        return r
            .map(Value::Number)
            .map_err(|e| runtime(format!("{func}: {e}")));
    }
    let (c, t) = comp_and_t(lua, &f, allow_density)?;
    property1_parsed(lua, m, func, &c, &t, prop)
}

/// [`property1`] once the arguments are read.
fn property1_parsed(
    lua: &Lua,
    m: &dyn Mixture,
    func: &str,
    c: &CompositionArg,
    t: &Numbers,
    prop: impl Fn(&dyn Mixture, f64, f64) -> kernel::Result<f64>,
) -> mlua::Result<Value> {
    let solved = solved_w(lua, m, c, func)?;
    let (basis, value) = with_solved(&solved, c);
    let [out] = bulk(
        lua,
        func,
        &[(key_of(basis), value), ("t_ref", &c.t_ref), ("t", t)],
        |x| {
            let w = w_of(m, basis, x[0], x[1], x[2])?;
            Ok([prop(m, w, x[2])?])
        },
    )?
    .into_values(lua)?;
    Ok(out)
}

/// `m:density{…}`. Arrays of mass fractions already inside the model's
/// range take a short cut: the range is checked once for the whole array
/// and ρ(w, t) evaluated directly (the same values as `Mixture::density`).
fn density(lua: &Lua, m: &dyn Mixture, arg: &Value) -> mlua::Result<Value> {
    let func = "density";
    let f = Fields::read(lua, arg, func, DENSITY_KEYS, "{abv = 40, t = 20}")?;
    if let Some((basis, value, t_ref, t)) = f.scalar_composition(false) {
        let rho = w_of(m, basis, value, t_ref, t).and_then(|w| m.density(w, t));
        return rho
            .map(Value::Number)
            .map_err(|e| runtime(format!("{func}: {e}")));
    }
    let (c, t) = comp_and_t(lua, &f, false)?;
    if c.basis == Basis::W {
        if let Some(n) = common_len(func, &[("w", &c.value), ("t", &t)])? {
            let v = m.validity();
            let within = |x: &Numbers, lo: f64, hi: f64| match x {
                Numbers::One(a) => *a >= lo && *a <= hi,
                Numbers::Many(xs) => xs.iter().all(|a| *a >= lo && *a <= hi),
            };
            if within(&c.value, v.w_min, v.w_max) && within(&t, v.t_min, v.t_max) {
                check_alloc(lua, func, n)?;
                let out = density_columns(m, &c.value, &t, n)
                    .map_err(|e| runtime(format!("{func}: {e}")))?;
                return Ok(Value::UserData(super::vector::create(lua, out)?));
            }
        }
    }
    property1_parsed(lua, m, func, &c, &t, |m, w, t| m.density(w, t))
}

/// ρ of `n` points through [`Mixture::density_slice`] (vectorised for the
/// reference equation); a scalar argument is repeated chunk by chunk so
/// that it costs no allocation.
fn density_columns(
    m: &dyn Mixture,
    w: &Numbers,
    t: &Numbers,
    n: usize,
) -> kernel::Result<Vec<f64>> {
    const CHUNK: usize = 256;
    let mut out = vec![0.0; n];
    if let (Numbers::Many(w), Numbers::Many(t)) = (w, t) {
        m.density_slice(w, t, &mut out)?;
        return Ok(out);
    }
    let (mut wb, mut tb) = ([0.0; CHUNK], [0.0; CHUNK]);
    for (k, oc) in out.chunks_mut(CHUNK).enumerate() {
        let len = oc.len();
        for j in 0..len {
            wb[j] = w.at(k * CHUNK + j);
            tb[j] = t.at(k * CHUNK + j);
        }
        m.density_slice(&wb[..len], &tb[..len], oc)?;
    }
    Ok(out)
}

/// A two-output property of (w, t), e.g. partial molar volumes.
fn property2(
    lua: &Lua,
    m: &dyn Mixture,
    arg: &Value,
    func: &str,
    prop: impl Fn(&dyn Mixture, f64, f64) -> kernel::Result<[f64; 2]>,
) -> mlua::Result<MultiValue> {
    let f = Fields::read(lua, arg, func, PROPERTY_KEYS, "{abv = 40, t = 20}")?;
    let (c, t) = comp_and_t(lua, &f, true)?;
    let solved = solved_w(lua, m, &c, func)?;
    let (basis, value) = with_solved(&solved, &c);
    let [a, b] = bulk(
        lua,
        func,
        &[(key_of(basis), value), ("t_ref", &c.t_ref), ("t", &t)],
        |x| {
            let w = w_of(m, basis, x[0], x[1], x[2])?;
            prop(m, w, x[2])
        },
    )?
    .into_values(lua)?;
    Ok(MultiValue::from_iter([a, b]))
}

fn strength(lua: &Lua, m: &dyn Mixture, arg: &Value, func: &str) -> mlua::Result<Table> {
    let f = Fields::read(lua, arg, func, STRENGTH_KEYS, "{density = 948.05, t = 20}")?;
    let c = composition(lua, &f, true)?;
    let basis = c.basis;
    if basis != Basis::Density && f.has("t") {
        return Err(runtime(format!(
            "{func}: t is the temperature of a density measurement and only goes with density; \
             for % vol referred to another temperature use t_ref"
        )));
    }
    let with_u = f.has("u_density") || f.has("u_t");
    if with_u {
        if basis != Basis::Density {
            return Err(runtime(format!(
                "{func}: u_density and u_t (standard uncertainties of a density reading) only go with density"
            )));
        }
        let u_rho = f.numbers_or(lua, "u_density", 0.0)?;
        let u_t = f.numbers_or(lua, "u_t", 0.0)?;
        let vals = bulk(
            lua,
            func,
            &[
                ("density", &c.value),
                ("t", &c.t_meas),
                ("u_density", &u_rho),
                ("u_t", &u_t),
            ],
            |x| {
                let (s, u) = m.strength_with_uncertainty(x[0], x[1], x[2], x[3])?;
                Ok([
                    s.w, s.abm, s.x, s.abv, s.proof, u.w, u.abm, u.x, u.abv, u.proof,
                ])
            },
        )?
        .into_values(lua)?;
        return table_of(lua, &STRENGTH_U_FIELDS, vals);
    }
    let bases = StrengthBases::new(m).map_err(|e| runtime(format!("{func}: {e}")))?;
    if let Some(Numbers::Many(w)) = solved_w(lua, m, &c, func)? {
        let cols = strength_columns(lua, m, func, w, &c)?;
        return table_of(lua, &STRENGTH_FIELDS, Bulk::Vectors(cols).into_values(lua)?);
    }
    let vals = bulk(
        lua,
        func,
        &[
            (key_of(basis), &c.value),
            ("t_ref", &c.t_ref),
            ("t", &c.t_meas),
        ],
        |x| {
            let w = w_of(m, basis, x[0], x[1], x[2])?;
            let s = bases.strength(w)?;
            Ok([s.w, s.abm, s.x, s.abv, s.proof])
        },
    )?
    .into_values(lua)?;
    table_of(lua, &STRENGTH_FIELDS, vals)
}

/// The strength columns (w, % mass, x, % vol, proof) of solved mass
/// fractions `w` of the density array in `c`, through the slice functions.
/// The values are those of `Mixture::strength`, except that for densities
/// measured at 20 °C % vol takes the measured density as ρ(w, 20 °C)
/// (one model evaluation fewer; equal to the solver's tolerance).
fn strength_columns(
    lua: &Lua,
    m: &dyn Mixture,
    func: &str,
    w: Vec<f64>,
    c: &CompositionArg,
) -> mlua::Result<[Vec<f64>; 5]> {
    let err = |e: kernel::Error| runtime(format!("{func}: {e}"));
    let n = w.len();
    check_alloc(lua, func, n.saturating_mul(4))?;
    let [a, b] = m.components();
    let (m1, m2) = (a.molar_mass, b.molar_mass);
    let abm = w.iter().map(|w| 100.0 * w).collect();
    let x = w.iter().map(|&w| x_from_w(w, m1, m2)).collect();
    let mut abv = vec![0.0; n];
    match (&c.value, &c.t_meas) {
        (Numbers::Many(rho), Numbers::One(t)) if *t == kernel::T_REF_C => {
            let rho1 = m.pure_density(0, kernel::T_REF_C).map_err(err)?;
            for ((o, &w), &r) in abv.iter_mut().zip(&w).zip(rho) {
                // As `composition::abv`, operation for operation.
                *o = (100.0 * (w * (r / rho1))).clamp(0.0, 100.0);
            }
        }
        _ => m.abv_slice(&w, kernel::T_REF_C, &mut abv).map_err(err)?,
    }
    let mut proof = vec![0.0; n];
    m.abv_slice(&w, kernel::T_PROOF_C, &mut proof)
        .map_err(err)?;
    proof.iter_mut().for_each(|p| *p *= 2.0);
    Ok([w, abm, x, abv, proof])
}

fn hydrometer(lua: &Lua, m: &dyn Mixture, arg: &Value) -> mlua::Result<Table> {
    let func = "hydrometer";
    let f = Fields::read(lua, arg, func, HYDROMETER_KEYS, "{abv = 41.2, t = 24}")?;
    let given = f.present(&["abv", "proof"]);
    let (key, proof) = match given.as_slice() {
        ["abv"] => ("abv", false),
        ["proof"] => ("proof", true),
        [] => {
            return Err(runtime(format!(
                "{func}: give the reading as abv (a % vol hydrometer calibrated at 20 °C) \
                 or proof (a US proof hydrometer calibrated at 60 °F)"
            )))
        }
        _ => {
            return Err(runtime(format!(
                "{func}: give exactly one reading, abv or proof, not both"
            )))
        }
    };
    let reading = f.required(lua, key, "the hydrometer reading")?;
    let t = f.required(
        lua,
        "t",
        "the temperature of the liquid in °C when it was read",
    )?;
    let alpha = f.numbers_or(lua, "alpha", GLASS_ALPHA)?;
    let vals = bulk(
        lua,
        func,
        &[(key, &reading), ("t", &t), ("alpha", &alpha)],
        |x| {
            let scale = if proof {
                HydrometerScale::ProofAt60F { alpha: x[2] }
            } else {
                HydrometerScale::AbvAt20 { alpha: x[2] }
            };
            let s = m.hydrometer(scale, x[0], x[1])?;
            Ok([s.w, s.abm, s.x, s.abv, s.proof])
        },
    )?
    .into_values(lua)?;
    table_of(lua, &STRENGTH_FIELDS, vals)
}

fn volume_at(lua: &Lua, m: &dyn Mixture, arg: &Value) -> mlua::Result<Value> {
    let func = "volume_at";
    let f = Fields::read(
        lua,
        arg,
        func,
        VOLUME_AT_KEYS,
        "{volume = 1000, abv = 40, from = 25, to = 20}",
    )?;
    let c = composition(lua, &f, true)?;
    if c.basis != Basis::Density && f.has("t") {
        return Err(runtime(format!(
            "{func}: t only goes with density (its measurement temperature); \
             the temperatures of the volume are from and to"
        )));
    }
    let basis = c.basis;
    let volume = f.required(lua, "volume", "the volume measured at `from`, any unit")?;
    let from = f.required(
        lua,
        "from",
        "the temperature in °C at which the volume was measured",
    )?;
    let to = f.numbers_or(lua, "to", kernel::T_REF_C)?;
    let [out] = bulk(
        lua,
        func,
        &[
            (key_of(basis), &c.value),
            ("t_ref", &c.t_ref),
            ("t", &c.t_meas),
            ("volume", &volume),
            ("from", &from),
            ("to", &to),
        ],
        |x| {
            let w = w_of(m, basis, x[0], x[1], x[2])?;
            Ok([m.volume_at(x[3], w, x[4], x[5])?])
        },
    )?
    .into_values(lua)?;
    Ok(out)
}

fn mix(lua: &Lua, m: &dyn Mixture, arg: &Value) -> mlua::Result<Table> {
    let func = "mix";
    let f = Fields::read(lua, arg, func, MIX_KEYS, "{v1 = 52, v2 = 48, t = 20}")?;
    let by_volume = f.has("v1") || f.has("v2");
    let by_mass = f.has("m1") || f.has("m2");
    if by_volume == by_mass {
        return Err(runtime(format!(
            "{func}: give either the volumes v1 and v2 (L) or the masses m1 and m2 (kg) of the two pure components"
        )));
    }
    let (k1, k2) = if by_volume {
        ("v1", "v2")
    } else {
        ("m1", "m2")
    };
    let a = f.required(lua, k1, "the amount of the first component")?;
    let b = f.required(lua, k2, "the amount of the second component")?;
    let t = f.numbers_or(lua, "t", kernel::T_REF_C)?;
    let vals = bulk(lua, func, &[(k1, &a), (k2, &b), ("t", &t)], |x| {
        let r = if by_volume {
            m.mix_volumes(x[0], x[1], x[2])?
        } else {
            m.mix_masses(x[0], x[1], x[2])?
        };
        let abv = m.abv_at(r.w, kernel::T_REF_C)?;
        Ok([r.w, abv, r.mass, r.volume_sum, r.volume, r.contraction])
    })?
    .into_values(lua)?;
    table_of(lua, &MIX_FIELDS, vals)
}

fn components(lua: &Lua, m: &dyn Mixture) -> mlua::Result<Table> {
    let list = lua.create_table()?;
    for (i, c) in m.components().iter().enumerate() {
        let t = lua.create_table()?;
        t.raw_set("name", c.name.as_str())?;
        t.raw_set("molar_mass", c.molar_mass)?;
        list.raw_set(i + 1, t)?;
    }
    Ok(list)
}

fn validity(lua: &Lua, m: &dyn Mixture) -> mlua::Result<Table> {
    let v = m.validity();
    let t = lua.create_table()?;
    t.raw_set("w_min", v.w_min)?;
    t.raw_set("w_max", v.w_max)?;
    t.raw_set("t_min", v.t_min)?;
    t.raw_set("t_max", v.t_max)?;
    Ok(t)
}

fn describe(m: &dyn Mixture) -> String {
    let v = m.validity();
    let [a, b] = m.components();
    format!(
        "mixture: {}\n  components: {} ({} g/mol) in {} ({} g/mol)\n  valid for w {} to {}, t {} to {} °C\n  help(m) lists the methods",
        m.name(),
        a.name,
        super::format::fmt_number(a.molar_mass),
        b.name,
        super::format::fmt_number(b.molar_mass),
        v.w_min,
        v.w_max,
        v.t_min,
        v.t_max
    )
}

impl UserData for MixtureUd {
    fn add_methods<M: UserDataMethods<Self>>(methods: &mut M) {
        methods.add_method("density", |lua, this, arg: Value| {
            density(lua, &*this.0, &arg)
        });
        methods.add_method("strength", |lua, this, arg: Value| {
            strength(lua, &*this.0, &arg, "strength")
        });
        methods.add_method("convert", |lua, this, arg: Value| {
            strength(lua, &*this.0, &arg, "convert")
        });
        methods.add_method("hydrometer", |lua, this, arg: Value| {
            hydrometer(lua, &*this.0, &arg)
        });
        methods.add_method("molar_volume", |lua, this, arg: Value| {
            property1(
                lua,
                &*this.0,
                &arg,
                "molar_volume",
                true,
                PROPERTY_KEYS,
                |m, w, t| m.molar_volume(w, t),
            )
        });
        methods.add_method("pmv", |lua, this, arg: Value| {
            property2(lua, &*this.0, &arg, "pmv", |m, w, t| {
                m.partial_molar_volumes(w, t)
            })
        });
        methods.add_method("excess_volume", |lua, this, arg: Value| {
            property1(
                lua,
                &*this.0,
                &arg,
                "excess_volume",
                true,
                PROPERTY_KEYS,
                |m, w, t| m.excess_molar_volume(w, t),
            )
        });
        methods.add_method("apparent_volume", |lua, this, arg: Value| {
            property2(lua, &*this.0, &arg, "apparent_volume", |m, w, t| {
                m.apparent_molar_volumes(w, t)
            })
        });
        methods.add_method("expansion", |lua, this, arg: Value| {
            property1(
                lua,
                &*this.0,
                &arg,
                "expansion",
                true,
                PROPERTY_KEYS,
                |m, w, t| m.expansion_coefficient(w, t),
            )
        });
        methods.add_method("volume_at", |lua, this, arg: Value| {
            volume_at(lua, &*this.0, &arg)
        });
        methods.add_method("mix", |lua, this, arg: Value| mix(lua, &*this.0, &arg));
        super::process::add_methods(methods);
        methods.add_method("components", |lua, this, ()| components(lua, &*this.0));
        methods.add_method("validity", |lua, this, ()| validity(lua, &*this.0));
        methods.add_method("name", |_, this, ()| Ok(this.0.name().to_string()));
        methods.add_method("describe", |_, this, ()| Ok(describe(&*this.0)));
        // Fit-only methods (report, save, …): see `fit` for how they find the fit.
        super::fit::add_fit_methods(methods);
        methods.add_meta_method(MetaMethod::ToString, |_, this, ()| {
            Ok(format!("mixture: {}", this.0.name()))
        });
    }
}

/// Registers the `mixture` namespace, its help, and tags the methods so
/// that `help(m.density)` works.
pub fn register(lua: &Lua) -> mlua::Result<()> {
    let ns = lua.create_table()?;
    let ew = lua.create_function(|lua, ()| {
        let model: Arc<dyn Mixture> = Arc::new(EthanolWater::new());
        mixture_userdata(lua, model)
    })?;
    ns.set("ethanol_water", ew.clone())?;
    lua.globals().set("mixture", ns.clone())?;
    tag(lua, Value::Table(ns), "mixture")?;
    tag(lua, Value::Function(ew), "mixture.ethanol_water")?;

    tag_methods(lua, &METHODS)?;

    for (name, sig, doc, keys) in help_entries() {
        add_help(lua, name, sig, &doc)?;
        if !keys.is_empty() {
            add_keys(lua, name, keys)?;
        }
    }
    Ok(())
}

const COMPOSITION_DOC: &str = "The composition is a table with exactly one of\n\
  w (mass fraction of the first component, 0–1), abm (% mass), x (mole fraction),\n\
  abv (% vol at 20 °C; t_ref = another reference temperature), proof (US proof,\n\
  twice the % vol at 60 °F) or density (kg/m³, with t its measurement temperature, °C).\n\
Any number may be an array (table or vector): the call then works element-wise,\n\
single numbers are repeated, and the results are vectors.";

fn help_entries() -> Vec<(&'static str, &'static str, String, &'static [&'static str])> {
    let c = COMPOSITION_DOC;
    let v =
        "Valid within the model's range (m:validity(); ethanol_water: w 0–1, t −20 to 40 °C);\n\
             a value outside is an error naming the quantity and the range.";
    vec![
        (
            "mixture",
            "mixture (namespace and type)",
            format!(
                "mixture.ethanol_water() → m, the reference model.\n\
                 Methods of m: {}.\n\
                 help \"mixture:density\" and so on for each.\n\n{CAUTIONS}",
                METHODS.join(", ")
            ),
            &[],
        ),
        (
            "mixture.ethanol_water",
            "mixture.ethanol_water() → m",
            format!(
                "Ethanol (first component) in water: the international alcoholometric\n\
                 formula, OIML R 22 (1975), also the annex of EU Council Directive\n\
                 76/766/EEC. ρ(w, t) for w 0–1 and t −20 to +40 °C.\n\n{CAUTIONS}"
            ),
            &[],
        ),
        (
            "mixture:density",
            "m:density{abv=…, t=…} → density, kg/m³",
            format!(
                "Density at t °C (default 20) of the given composition.\n{c}\n\
                 (A density is not accepted as the composition here.)\n{v}\n\n{CAUTIONS}"
            ),
            DENSITY_KEYS,
        ),
        (
            "mixture:strength",
            "m:strength{density=…, t=…[, u_density=…, u_t=…]} → {w, abm, x, abv, proof}",
            format!(
                "True strength in every basis: w (0–1), abm (% mass), x (mole fraction),\n\
                 abv (% vol at 20 °C), proof (US proof). With density, t is the\n\
                 measurement temperature in °C. u_density (kg/m³) and u_t (K), standard\n\
                 uncertainties of the reading, add u_w, u_abm, u_x, u_abv, u_proof\n\
                 (first-order propagation, GUM; the two inputs taken as uncorrelated).\n\
                 {c}\n{v}\n\n{CAUTIONS}"
            ),
            STRENGTH_KEYS,
        ),
        (
            "mixture:convert",
            "m:convert{abv=…} → {w, abm, x, abv, proof}",
            format!(
                "The composition in every basis (same as m:strength).\n{c}\n{v}\n\n{CAUTIONS}"
            ),
            STRENGTH_KEYS,
        ),
        (
            "mixture:hydrometer",
            "m:hydrometer{abv=reading, t=…[, alpha=…]} or m:hydrometer{proof=reading, t=…} → {w, abm, x, abv, proof}",
            format!(
                "True strength from a glass hydrometer read at t °C: abv for a % vol\n\
                 hydrometer calibrated at 20 °C, proof for a US proof hydrometer\n\
                 calibrated at 60 °F. The glass's cubic expansion coefficient alpha\n\
                 (1/K) defaults to {GLASS_ALPHA} (common practice for instrument glass).\n\
                 Surface-tension effects are neglected.\n{v}\n\n{CAUTIONS}"
            ),
            HYDROMETER_KEYS,
        ),
        (
            "mixture:molar_volume",
            "m:molar_volume{abv=…, t=…} → V_m, cm³/mol",
            format!("Molar volume of the mixture, V_m = M/ρ, at t °C (default 20).\n{c}\n{v}"),
            PROPERTY_KEYS,
        ),
        (
            "mixture:pmv",
            "m:pmv{abv=…, t=…} → V̄₁, V̄₂ (cm³/mol)",
            format!(
                "Partial molar volumes of the two components at t °C, exact from the\n\
                 model's ∂ρ/∂w: V̄₁ = M₁(v + (1−w) ∂v/∂w), V̄₂ = M₂(v − w ∂v/∂w), v = 1/ρ.\n{c}\n{v}"
            ),
            PROPERTY_KEYS,
        ),
        (
            "mixture:excess_volume",
            "m:excess_volume{abv=…, t=…} → V^E, cm³/mol",
            format!(
                "Excess molar volume V^E = V_m − x V₁* − (1−x) V₂* at t °C (negative\n\
                 when the mixture contracts).\n{c}\n{v}"
            ),
            PROPERTY_KEYS,
        ),
        (
            "mixture:apparent_volume",
            "m:apparent_volume{abv=…, t=…} → φV₁, φV₂ (cm³/mol)",
            format!(
                "Apparent molar volumes: φV₁ = (V_m − (1−x)V₂*)/x and symmetrically; at\n\
                 infinite dilution they equal the partial molar volume there.\n{c}\n{v}"
            ),
            PROPERTY_KEYS,
        ),
        (
            "mixture:expansion",
            "m:expansion{abv=…, t=…} → α, 1/K",
            format!("Cubic thermal expansion coefficient α = −(1/ρ) ∂ρ/∂t at t °C.\n{c}\n{v}"),
            PROPERTY_KEYS,
        ),
        (
            "mixture:volume_at",
            "m:volume_at{volume=…, abv=…, from=…, to=…} → volume (same unit)",
            format!(
                "The volume at `to` °C (default 20) of liquid that measures `volume`\n\
                 at `from` °C, mass conserved: V·ρ(from)/ρ(to). Any volume unit.\n{c}\n{v}\n\n{CAUTIONS}"
            ),
            VOLUME_AT_KEYS,
        ),
        (
            "mixture:mix",
            "m:mix{v1=…, v2=…, t=…} or m:mix{m1=…, m2=…, t=…} → {w, abv, mass, volume_sum, volume, contraction}",
            format!(
                "Mixing v1 and v2 litres (or m1 and m2 kg) of the pure components, all\n\
                 at t °C (default 20). volume is the mixture's volume in L, volume_sum\n\
                 the sum of the volumes before mixing, contraction their difference\n\
                 (positive when the volume shrinks), mass in kg, abv of the mixture.\n{v}"
            ),
            MIX_KEYS,
        ),
        (
            "mixture:components",
            "m:components() → {{name=…, molar_mass=…}, {…}}",
            "The two components in the model's fixed order; molar masses in g/mol.".into(),
            &[],
        ),
        (
            "mixture:validity",
            "m:validity() → {w_min, w_max, t_min, t_max}",
            "Where the model holds: mass fraction range and temperature range (°C).".into(),
            &[],
        ),
        (
            "mixture:name",
            "m:name() → string",
            "The model's name.".into(),
            &[],
        ),
        (
            "mixture:describe",
            "m:describe() → string",
            "A short description: name, components, validity.".into(),
            &[],
        ),
    ]
}
