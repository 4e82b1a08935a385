//! The `units` namespace: conversions between the units meniscus computes
//! in (°C, L, kg, kg/m³) and those the trade also uses (°F, US gallons,
//! pounds, g/cm³), with the exact defining factors of
//! [`crate::kernel::process::units`]. Each takes a number, an array or a
//! vector (element-wise, like the mixture methods).

use mlua::{Lua, Value};

use super::convert::{bulk, numbers};
use super::help::{add_help, tag};
use crate::kernel::process::units as u;

/// (name, conversion, signature, doc).
type Unit = (&'static str, fn(f64) -> f64, &'static str, &'static str);

const UNITS: [Unit; 8] = [
    (
        "f_to_c",
        u::f_to_c,
        "units.f_to_c(°F) → °C",
        "(f − 32) × 5/9.",
    ),
    (
        "c_to_f",
        u::c_to_f,
        "units.c_to_f(°C) → °F",
        "c × 9/5 + 32.",
    ),
    (
        "gal_to_l",
        u::us_gal_to_l,
        "units.gal_to_l(US gallons) → L",
        "× 3.785411784 (the US liquid gallon, 231 in³, exact).",
    ),
    (
        "l_to_gal",
        u::l_to_us_gal,
        "units.l_to_gal(L) → US gallons",
        "÷ 3.785411784 (the US liquid gallon, 231 in³, exact).",
    ),
    (
        "lb_to_kg",
        u::lb_to_kg,
        "units.lb_to_kg(lb) → kg",
        "× 0.45359237 (the avoirdupois pound, exact).",
    ),
    (
        "kg_to_lb",
        u::kg_to_lb,
        "units.kg_to_lb(kg) → lb",
        "÷ 0.45359237 (the avoirdupois pound, exact).",
    ),
    (
        "g_cm3_to_kg_m3",
        u::g_cm3_to_kg_m3,
        "units.g_cm3_to_kg_m3(g/cm³) → kg/m³",
        "× 1000 (g/cm³ = kg/L).",
    ),
    (
        "kg_m3_to_g_cm3",
        u::kg_m3_to_g_cm3,
        "units.kg_m3_to_g_cm3(kg/m³) → g/cm³",
        "÷ 1000.",
    ),
];

/// Registers the `units` namespace.
pub fn register(lua: &Lua) -> mlua::Result<()> {
    let ns = lua.create_table()?;
    let mut names = Vec::new();
    for (name, conv, sig, doc) in UNITS {
        let full = format!("units.{name}");
        let func_name = full.clone();
        let f = lua.create_function(move |lua, v: Value| {
            let x = numbers(lua, &v, &func_name, "the value")?;
            let [out] = bulk(lua, &func_name, &[("the value", &x)], |x| Ok([conv(x[0])]))?
                .into_values(lua)?;
            Ok(out)
        })?;
        ns.set(name, f.clone())?;
        tag(lua, Value::Function(f), &full)?;
        add_help(
            lua,
            &full,
            sig,
            &format!("{doc}\nA number, an array or a vector (element-wise)."),
        )?;
        names.push(full);
    }
    lua.globals().set("units", ns.clone())?;
    tag(lua, Value::Table(ns), "units")?;
    add_help(
        lua,
        "units",
        "units (namespace)",
        &format!(
            "Unit conversions with exact defining factors: {}.\n\
             meniscus itself works in °C, L, kg and kg/m³.",
            names.join(", ")
        ),
    )?;
    Ok(())
}
