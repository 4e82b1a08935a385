//! The process calculations as methods of every mixture userdata:
//! `m:pure_alcohol{…}`, `m:reduce{…}`, `m:blend{…}`, `m:plan_blend{…}` and
//! `m:bottles{…}`, over the kernel's [`crate::kernel::process`].
//!
//! A lot is a keyword table: an amount (`volume` in L at `t` °C, or `mass`
//! in kg, true or with `air = true` a balance reading in air) and a strength
//! under any composition key, read by the same helpers as the other mixture
//! methods. These calls take single numbers, not arrays: each is one lot or
//! one plan. Errors name the method, the lot (counted from 1) and the key.

use mlua::{Lua, Table, UserDataMethods, Value};

use super::convert::{composition, describe_value, number, opt_number, Fields, Numbers};
use super::errors::runtime;
use super::help::{add_help, add_keys};
use super::mixture::{MixtureUd, CAUTIONS};
use crate::kernel::process::{
    self, Amount, Lot, PlanLot, PlanTarget, PlanWater, Weighing, MAX_PLAN_LOTS,
};
use crate::kernel::{self, Composition, Mixture};

/// Method names added to every mixture userdata by this module.
pub const METHODS: [&str; 5] = ["pure_alcohol", "reduce", "blend", "plan_blend", "bottles"];

/// A key list: the strength keys (composition and its temperatures), then
/// `extra`, so every table that describes a strength accepts them alike.
macro_rules! strength_keys {
    ($($extra:literal),* $(,)?) => {
        &["w", "abm", "x", "abv", "proof", "density", "t", "t_ref", $($extra),*]
    };
}

/// A key list: the strength keys, the amount keys of a lot, then `extra`.
macro_rules! lot_keys {
    ($($extra:literal),* $(,)?) => {
        strength_keys!(
            "volume",
            "mass",
            "air",
            "air_density",
            "weights_density",
            $($extra),*
        )
    };
}

/// Keys of a lot table: composition, temperature, amount.
const LOT_KEYS: &[&str] = lot_keys!();
const REDUCE_KEYS: &[&str] = lot_keys!("target", "water_t");
const BOTTLES_KEYS: &[&str] = lot_keys!("size");
const TARGET_KEYS: &[&str] = strength_keys!();
const PLAN_KEYS: &[&str] = &["lots", "target", "water"];
const PLAN_LOT_KEYS: &[&str] = strength_keys!("cost", "limit", "limit_mass");
const PLAN_WATER_KEYS: &[&str] = &["t", "cost", "limit", "limit_mass"];
const PLAN_TARGET_KEYS: &[&str] = strength_keys!("volume");

/// Most lots one `m:blend` call takes (far more than any cellar blends; a
/// bound on what Rust allocates on a script's behalf).
const MAX_BLEND_LOTS: usize = 100_000;

/// A single number from a composition value (the helpers accept arrays for
/// the other methods; process calls take one lot at a time).
fn single(n: &Numbers, func: &str, key: &str) -> mlua::Result<f64> {
    match n {
        Numbers::One(x) => Ok(*x),
        Numbers::Many(_) => Err(runtime(format!(
            "{func}: {key} must be a single number here (process calculations take one lot at a time)"
        ))),
    }
}

/// The strength given in `f` under one composition key, as one kernel
/// composition. With `density`, `t` is its measurement temperature.
fn strength_of(lua: &Lua, f: &Fields) -> mlua::Result<Composition> {
    let func = f.func();
    let c = composition(lua, f, true)?;
    let key = super::convert::COMPOSITION_KEYS[c.basis as usize];
    let value = single(&c.value, func, key)?;
    let t_ref = single(&c.t_ref, func, "t_ref")?;
    let t_meas = single(&c.t_meas, func, "t")?;
    Ok(super::convert::CompositionArg::composition(
        c.basis, value, t_ref, t_meas,
    ))
}

/// The amount of a lot table: exactly one of `volume` (L at `t`, default
/// 20 °C) and `mass` (kg; with `air = true` a balance reading in air, the
/// liquid at `t`).
fn amount_of(f: &Fields) -> mlua::Result<Amount> {
    let func = f.func();
    let t = opt_number(f.get("t")?.as_ref(), func, "t")?.unwrap_or(kernel::T_REF_C);
    let air = f.opt_bool("air")?.unwrap_or(false);
    let volume = opt_number(f.get("volume")?.as_ref(), func, "volume")?;
    let mass = opt_number(f.get("mass")?.as_ref(), func, "mass")?;
    if !air && (f.has("air_density") || f.has("weights_density")) {
        return Err(runtime(format!(
            "{func}: air_density and weights_density only go with air = true (a mass weighed in air)"
        )));
    }
    match (volume, mass) {
        (Some(_), Some(_)) => Err(runtime(format!(
            "{func}: give the amount once, as volume (L) or as mass (kg), not both"
        ))),
        (None, None) => Err(runtime(format!(
            "{func}: the amount is missing: give volume (L at t °C) or mass (kg)"
        ))),
        (Some(_), None) if air => Err(runtime(format!(
            "{func}: air = true goes with mass (a balance reading in kg), not with volume"
        ))),
        (Some(litres), None) => Ok(Amount::Volume { litres, t }),
        (None, Some(kg)) if air => {
            let d = Weighing::default();
            let weighing = Weighing {
                air_density: opt_number(f.get("air_density")?.as_ref(), func, "air_density")?
                    .unwrap_or(d.air_density),
                weights_density: opt_number(
                    f.get("weights_density")?.as_ref(),
                    func,
                    "weights_density",
                )?
                .unwrap_or(d.weights_density),
            };
            Ok(Amount::WeighedInAir { kg, t, weighing })
        }
        (None, Some(kg)) => Ok(Amount::Mass { kg }),
    }
}

/// A lot from a keyword table already read into `f`.
fn lot_of(lua: &Lua, f: &Fields) -> mlua::Result<Lot> {
    let amount = amount_of(f)?;
    let strength = strength_of(lua, f)?;
    Ok(Lot { amount, strength })
}

fn kernel_err(func: &str, e: kernel::Error) -> mlua::Error {
    runtime(format!("{func}: {e}"))
}

fn record(lua: &Lua, pairs: &[(&str, f64)]) -> mlua::Result<Table> {
    let t = lua.create_table_with_capacity(0, pairs.len())?;
    for (k, v) in pairs {
        t.raw_set(*k, *v)?;
    }
    Ok(t)
}

/// The elements of a Lua sequence, checked: a table with keys 1..n only.
fn sequence(v: &Value, func: &str, what: &str, example: &str) -> mlua::Result<Vec<Value>> {
    let Value::Table(t) = v else {
        return Err(runtime(format!(
            "{func}: {what} must be a list of tables like {example}, got {}",
            describe_value(v)
        )));
    };
    let n = t.raw_len();
    if n > MAX_BLEND_LOTS {
        return Err(runtime(format!(
            "{func}: {n} {what} is more than the {MAX_BLEND_LOTS} one call takes"
        )));
    }
    let mut items: Vec<Option<Value>> = vec![None; n];
    t.for_each::<Value, Value>(|k, v| match k {
        Value::Integer(i) if i >= 1 && (i as u64) <= n as u64 => {
            items[i as usize - 1] = Some(v);
            Ok(())
        }
        Value::String(s) => Err(runtime(format!(
            "{func}: {what} must be a list, but it has the key '{}' (put each lot in its own table: {example})",
            s.to_string_lossy()
        ))),
        other => Err(runtime(format!(
            "{func}: {what} must be a list, but it has the key {}",
            describe_value(&other)
        ))),
    })?;
    items
        .into_iter()
        .enumerate()
        .map(|(i, v)| {
            v.ok_or_else(|| {
                runtime(format!(
                    "{func}: {what}[{}] is nil: the list has a hole",
                    i + 1
                ))
            })
        })
        .collect()
}

fn pure_alcohol(lua: &Lua, m: &dyn Mixture, arg: &Value) -> mlua::Result<Table> {
    let func = "pure_alcohol";
    let f = Fields::read(
        lua,
        arg,
        func,
        LOT_KEYS,
        "{volume = 1000, abv = 40, t = 20}",
    )?;
    let lot = lot_of(lua, &f)?;
    let p = process::pure_alcohol(m, &lot).map_err(|e| kernel_err(func, e))?;
    record(
        lua,
        &[
            ("lpa", p.lpa),
            ("proof_gallons", p.proof_gallons),
            ("volume", p.volume_20),
            ("mass", p.mass),
            ("abv", p.abv),
            ("proof", p.proof),
            ("w", p.w),
            ("wine_gallons", p.wine_gallons),
        ],
    )
}

/// A reduction target: a number (% vol at 20 °C) or a composition table.
fn target_of(lua: &Lua, v: Option<&Value>, func: &str) -> mlua::Result<Composition> {
    match v {
        None | Some(Value::Nil) => Err(runtime(format!(
            "{func}: target is required: the strength to reduce to, in % vol at 20 °C \
             (target = 40) or as a table (target = {{proof = 80}})"
        ))),
        Some(Value::Table(_)) => {
            let name = format!("{func}: target");
            let f = Fields::read(
                lua,
                v.unwrap_or(&Value::Nil),
                &name,
                TARGET_KEYS,
                "{proof = 80}",
            )?;
            strength_of(lua, &f)
        }
        Some(other) => Ok(Composition::abv(number(other, func, "target")?)),
    }
}

fn reduce(lua: &Lua, m: &dyn Mixture, arg: &Value) -> mlua::Result<Table> {
    let func = "reduce";
    let f = Fields::read(
        lua,
        arg,
        func,
        REDUCE_KEYS,
        "{volume = 1000, abv = 63.5, t = 20, target = 40}",
    )?;
    let lot = lot_of(lua, &f)?;
    let target = target_of(lua, f.get("target")?.as_ref(), func)?;
    let water_t =
        opt_number(f.get("water_t")?.as_ref(), func, "water_t")?.unwrap_or(kernel::T_REF_C);
    let r =
        process::reduce_with_water_at(m, &lot, target, water_t).map_err(|e| kernel_err(func, e))?;
    let abv = m
        .abv_at(r.final_w, kernel::T_REF_C)
        .map_err(|e| kernel_err(func, e))?;
    record(
        lua,
        &[
            ("water", r.water_l),
            ("water_kg", r.water_kg),
            ("water_at_t", r.water_l_at_t),
            ("volume", r.final_volume),
            ("mass", r.final_mass),
            ("abv", abv),
            ("w", r.final_w),
            ("lot_volume", r.lot_volume_20),
            ("contraction", r.contraction),
            ("naive_water", r.naive_water_l),
            ("naive_error", r.naive_error_l),
        ],
    )
}

fn blend_record(lua: &Lua, b: &process::Blend) -> mlua::Result<Table> {
    record(
        lua,
        &[
            ("volume", b.volume),
            ("mass", b.mass),
            ("abv", b.abv),
            ("w", b.w),
            ("proof", b.proof),
            ("lpa", b.lpa),
            ("lots_volume", b.lots_volume_20),
            ("contraction", b.contraction),
        ],
    )
}

fn blend(lua: &Lua, m: &dyn Mixture, arg: &Value) -> mlua::Result<Table> {
    let func = "blend";
    let example = "{{volume = 500, abv = 60}, {mass = 250, abv = 40}}";
    let items = sequence(arg, func, "the lots", example)?;
    if items.is_empty() {
        return Err(runtime(format!(
            "{func}: give at least one lot, like m:blend{example}"
        )));
    }
    let mut lots = Vec::with_capacity(items.len());
    for (i, v) in items.iter().enumerate() {
        let name = format!("{func}: lot {}", i + 1);
        let f = Fields::read(lua, v, &name, LOT_KEYS, "{volume = 500, abv = 60, t = 20}")?;
        lots.push(lot_of(lua, &f)?);
    }
    let b = process::blend(m, &lots).map_err(|e| kernel_err(func, e))?;
    blend_record(lua, &b)
}

/// A limit from `limit` (L, gauged at the source's `t`, default 20 °C) or
/// `limit_mass` (kg, true mass), at most one of them.
fn limit_of(f: &Fields, t: Option<f64>) -> mlua::Result<Option<Amount>> {
    let func = f.func();
    let litres = opt_number(f.get("limit")?.as_ref(), func, "limit")?;
    let kg = opt_number(f.get("limit_mass")?.as_ref(), func, "limit_mass")?;
    match (litres, kg) {
        (Some(_), Some(_)) => Err(runtime(format!(
            "{func}: give limit (L) or limit_mass (kg), not both"
        ))),
        (Some(litres), None) => Ok(Some(Amount::Volume {
            litres,
            t: t.unwrap_or(kernel::T_REF_C),
        })),
        (None, Some(kg)) => Ok(Some(Amount::Mass { kg })),
        (None, None) => Ok(None),
    }
}

fn plan_item(lua: &Lua, item: &process::PlanItem) -> mlua::Result<Table> {
    let t = record(
        lua,
        &[
            ("volume", item.volume_20),
            ("mass", item.mass),
            ("cost", item.cost),
        ],
    )?;
    if let Some(v) = item.volume_at_t {
        t.raw_set("volume_at_t", v)?;
    }
    Ok(t)
}

fn plan_blend(lua: &Lua, m: &dyn Mixture, arg: &Value) -> mlua::Result<Table> {
    let func = "plan_blend";
    let f = Fields::read(
        lua,
        arg,
        func,
        PLAN_KEYS,
        "{lots = {{abv = 60}, {abv = 45}}, target = {abv = 40, volume = 1000}}",
    )?;
    let lot_values = match f.get("lots")?.as_ref() {
        None | Some(Value::Nil) => Vec::new(),
        Some(v) => sequence(v, func, "lots", "{{abv = 60, cost = 9.5, limit = 800}}")?,
    };
    if lot_values.len() > MAX_PLAN_LOTS {
        return Err(runtime(format!(
            "{func}: a plan takes at most {MAX_PLAN_LOTS} lots, got {}",
            lot_values.len()
        )));
    }
    let mut lots = Vec::with_capacity(lot_values.len());
    for (i, v) in lot_values.iter().enumerate() {
        let name = format!("{func}: lot {}", i + 1);
        let lf = Fields::read(
            lua,
            v,
            &name,
            PLAN_LOT_KEYS,
            "{abv = 60, cost = 9.5, limit = 800}",
        )?;
        let strength = strength_of(lua, &lf)?;
        let t = opt_number(lf.get("t")?.as_ref(), &name, "t")?;
        let mut lot = PlanLot::new(strength);
        lot.t = t;
        lot.limit = limit_of(&lf, t)?;
        lot.cost_per_l = opt_number(lf.get("cost")?.as_ref(), &name, "cost")?.unwrap_or(0.0);
        lots.push(lot);
    }
    let water = match f.get("water")?.as_ref() {
        None | Some(Value::Nil) | Some(Value::Boolean(true)) => Some(PlanWater::default()),
        Some(Value::Boolean(false)) => None,
        Some(v @ Value::Table(_)) => {
            let name = format!("{func}: water");
            let wf = Fields::read(lua, v, &name, PLAN_WATER_KEYS, "{cost = 0.002, t = 12}")?;
            let t = opt_number(wf.get("t")?.as_ref(), &name, "t")?;
            Some(PlanWater {
                t,
                limit: limit_of(&wf, t)?,
                cost_per_l: opt_number(wf.get("cost")?.as_ref(), &name, "cost")?.unwrap_or(0.0),
            })
        }
        Some(other) => {
            return Err(runtime(format!(
                "{func}: water must be a table like {{cost = 0, limit = 500}}, or false for no water, got {}",
                describe_value(other)
            )))
        }
    };
    let target = match f.get("target")?.as_ref() {
        Some(v @ Value::Table(_)) => {
            let name = format!("{func}: target");
            let tf = Fields::read(lua, v, &name, PLAN_TARGET_KEYS, "{abv = 40, volume = 1000}")?;
            let strength = strength_of(lua, &tf)?;
            if tf.has("t") && !tf.has("density") {
                return Err(runtime(format!(
                    "{name}: t only goes with density (its measurement temperature); \
                     the target volume is in L at 20 °C"
                )));
            }
            let volume =
                opt_number(tf.get("volume")?.as_ref(), &name, "volume")?.ok_or_else(|| {
                    runtime(format!(
                        "{name}: volume is required (the blend's volume in L at 20 °C)"
                    ))
                })?;
            PlanTarget {
                strength,
                volume_20: volume,
            }
        }
        None | Some(Value::Nil) => {
            return Err(runtime(format!(
                "{func}: target is required, like target = {{abv = 40, volume = 1000}}"
            )))
        }
        Some(other) => {
            return Err(runtime(format!(
                "{func}: target must be a table like {{abv = 40, volume = 1000}}, got {}",
                describe_value(other)
            )))
        }
    };
    let plan =
        process::plan_blend(m, &lots, water.as_ref(), &target).map_err(|e| kernel_err(func, e))?;
    let out = lua.create_table()?;
    let list = lua.create_table_with_capacity(plan.lots.len(), 0)?;
    for (i, item) in plan.lots.iter().enumerate() {
        list.raw_set(i + 1, plan_item(lua, item)?)?;
    }
    out.raw_set("lots", list)?;
    if let Some(w) = &plan.water {
        out.raw_set("water", plan_item(lua, w)?)?;
    }
    out.raw_set("cost", plan.total_cost)?;
    out.raw_set("blend", blend_record(lua, &plan.blend)?)?;
    Ok(out)
}

fn bottles(lua: &Lua, m: &dyn Mixture, arg: &Value) -> mlua::Result<Table> {
    let func = "bottles";
    let f = Fields::read(
        lua,
        arg,
        func,
        BOTTLES_KEYS,
        "{volume = 1200, abv = 40, t = 20, size = 0.7}",
    )?;
    let lot = lot_of(lua, &f)?;
    let size = opt_number(f.get("size")?.as_ref(), func, "size")?.ok_or_else(|| {
        runtime(format!(
            "{func}: size is required (the bottle's labelled volume in L, e.g. 0.7)"
        ))
    })?;
    let b = process::bottling(m, &lot, size).map_err(|e| kernel_err(func, e))?;
    let t = lua.create_table_with_capacity(0, 3)?;
    // A whole count: an integer in Lua (u64 beyond i64 cannot occur, the
    // kernel caps counts at 2⁵³).
    t.raw_set("count", b.bottles as i64)?;
    t.raw_set("remainder", b.remainder_l)?;
    t.raw_set("volume", b.volume_20)?;
    Ok(t)
}

/// Adds the process methods to the mixture userdata (called from its
/// `add_methods`).
pub fn add_methods<M: UserDataMethods<MixtureUd>>(methods: &mut M) {
    methods.add_method("pure_alcohol", |lua, this, arg: Value| {
        pure_alcohol(lua, &*this.0, &arg)
    });
    methods.add_method("reduce", |lua, this, arg: Value| {
        reduce(lua, &*this.0, &arg)
    });
    methods.add_method("blend", |lua, this, arg: Value| blend(lua, &*this.0, &arg));
    methods.add_method("plan_blend", |lua, this, arg: Value| {
        plan_blend(lua, &*this.0, &arg)
    });
    methods.add_method("bottles", |lua, this, arg: Value| {
        bottles(lua, &*this.0, &arg)
    });
}

const LOT_DOC: &str = "A lot is a table: the amount, volume = litres gauged at t °C (t defaults\n\
to 20), or mass = kg (true mass, in vacuum), or mass = kg with air = true\n\
(a balance reading in air, the liquid at t °C; buoyancy corrected with\n\
air_density = 1.2 and weights_density = 8000 kg/m³ unless given); and the\n\
strength under one key: w (0–1), abm (% mass), x (mole fraction), abv (% vol\n\
at 20 °C; t_ref for another reference), proof (US proof) or density (kg/m³,\n\
measured at t °C — then t is both the density's and the gauging temperature).\n\
Single numbers only (one lot per call).";

const PROCESS_CAUTION: &str =
    "Prescribed tables (e.g. the US gauging tables of 27 CFR Part 30, the EU\n\
and UK official alcoholometric tables) can differ from the reference\n\
equation in the last digits; where they are prescribed, they take precedence.";

/// Registers the help of the process methods and tags them, so that
/// `help(m.reduce)` and completion find them.
pub fn register(lua: &Lua) -> mlua::Result<()> {
    super::mixture::tag_methods(lua, &METHODS)?;
    for (name, sig, doc, keys) in help_entries() {
        add_help(lua, name, sig, &doc)?;
        add_keys(lua, name, keys)?;
    }
    // The mixture overview lists the methods it knows of; name ours there.
    if let Some(e) = super::help::entry(lua, "mixture") {
        let doc = format!(
            "{}\n\nProcess calculations on any mixture: {} (help \"mixture:reduce\" …).",
            e.doc,
            METHODS.join(", ")
        );
        add_help(lua, "mixture", &e.signature, &doc)?;
    }
    Ok(())
}

fn help_entries() -> Vec<(&'static str, &'static str, String, &'static [&'static str])> {
    let cautions = format!("{PROCESS_CAUTION}\n{CAUTIONS}");
    vec![
        (
            "mixture:pure_alcohol",
            "m:pure_alcohol{volume=…, abv=…, t=…} or {mass=…, proof=…, air=true} → {lpa, proof_gallons, volume, mass, abv, proof, w, wine_gallons}",
            format!(
                "Pure alcohol in a lot. lpa: litres of pure alcohol at 20 °C (volume at\n\
                 20 °C × % vol / 100); proof_gallons: US proof gallons (wine gallons at\n\
                 60 °F × proof / 100); volume: L at 20 °C; mass: kg in vacuum;\n\
                 wine_gallons: US gallons at 60 °F; abv (% vol at 20 °C), proof, w.\n\
                 {LOT_DOC}\n\n{cautions}"
            ),
            LOT_KEYS,
        ),
        (
            "mixture:reduce",
            "m:reduce{volume=…, abv=…, t=…, target=…[, water_t=…]} → {water, water_kg, water_at_t, volume, mass, abv, w, lot_volume, contraction, naive_water, naive_error}",
            format!(
                "Water to bring a lot down to target (% vol at 20 °C, or a table such as\n\
                 {{proof = 80}}), exact in mass: water_kg = m (w/w_target − 1).\n\
                 water: L at 20 °C; water_at_t: L at the water's temperature water_t\n\
                 (°C, default 20); volume, mass: the reduced lot (L at 20 °C, kg);\n\
                 lot_volume: the lot before, L at 20 °C; contraction: L lost on mixing;\n\
                 naive_water: the volume-additive estimate lot_volume × (abv/target − 1),\n\
                 and naive_error = naive_water − water (it falls short by the contraction).\n\
                 The target must lie strictly between 0 and the lot's strength.\n\
                 {LOT_DOC}\n\n{cautions}"
            ),
            REDUCE_KEYS,
        ),
        (
            "mixture:blend",
            "m:blend{{volume=…, abv=…, t=…}, {mass=…, abv=…}, …} → {volume, mass, abv, w, proof, lpa, lots_volume, contraction}",
            format!(
                "Mixes the lots (water is a lot with abv = 0). Mass and alcohol mass add;\n\
                 volumes do not. volume: L at 20 °C; mass: kg; lpa: L of pure alcohol;\n\
                 lots_volume: the lots' volumes at 20 °C added up; contraction:\n\
                 lots_volume − volume. An error names the lot, counted from 1.\n\
                 {LOT_DOC}\n\n{cautions}"
            ),
            LOT_KEYS,
        ),
        (
            "mixture:plan_blend",
            "m:plan_blend{lots={{abv=…, cost=…, limit=…}, …}, target={abv=…, volume=…}[, water={cost=…, limit=…}]} → {lots={{volume, mass, cost[, volume_at_t]}, …}, water={…}, cost, blend={…}}",
            format!(
                "The cheapest amounts of the lots (and water) that make target.volume\n\
                 litres at 20 °C of the target strength (any composition key).\n\
                 Each lot: a strength key, cost (per L at 20 °C, default 0), limit (L,\n\
                 gauged at the lot's t, default 20 °C) or limit_mass (kg), and t (°C,\n\
                 where it is drawn: volume_at_t is then also given). water: a table\n\
                 with cost, limit or limit_mass and t; omitted or true for free,\n\
                 unlimited water; false for none. Results: volume (L at 20 °C), mass\n\
                 (kg), cost per source; cost, the total; blend, what the plan makes.\n\
                 Method: an exact linear programme. The target fixes the blend's mass\n\
                 and alcohol mass, two linear equalities in the sources' masses with\n\
                 bounds 0…limit, so an optimum is a vertex with at most two sources\n\
                 between their bounds. Every pair of sources of different strength is\n\
                 tried as the basis, the others set to zero or their limit by reduced\n\
                 cost; a pair within bounds is optimal by LP duality, and the cheapest\n\
                 is returned. No iteration, no tolerance. When no mix of what is\n\
                 available reaches the target, the error says why.\n\n{cautions}"
            ),
            PLAN_KEYS,
        ),
        (
            "mixture:bottles",
            "m:bottles{volume=…, abv=…, t=…, size=0.7} → {count, remainder, volume}",
            format!(
                "Whole bottles of size litres (labelled volume, at 20 °C) the lot fills:\n\
                 count (an integer), remainder (L at 20 °C left after the last whole\n\
                 bottle), volume (the lot in L at 20 °C). Fill-level tolerances and\n\
                 losses on the line are not modelled.\n{LOT_DOC}\n\n{cautions}"
            ),
            BOTTLES_KEYS,
        ),
    ]
}
