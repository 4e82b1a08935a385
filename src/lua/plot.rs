//! The `plot` namespace, mixture figures: `plot.density(m, path, opts)`,
//! `plot.excess(m, path, opts)`, `plot.pmv(m, path, opts)` render SVG with
//! [`crate::plot`] and write it atomically through the host's checked file
//! access ([`files::write_text`]: only under the working directory or an
//! `--allow-path` directory).
//!
//! Any mixture can be drawn (the reference model as well as a fitted one);
//! for a fitted mixture the data rows are drawn as points and the partial
//! molar volumes get their ±2u band, unless `opts` turns them off.
//!
//! Other modules add functions to the same `plot` table (e.g. charts of a
//! daily job): [`register`] adds to an existing table instead of replacing
//! it, so the registrations compose in any order.

use std::sync::Arc;

use mlua::{Lua, Table, Value};

use super::convert::{describe_value, number, numbers, Fields, Numbers};
use super::errors::runtime;
use super::files;
use super::fit::{fit_of, FitInfo};
use super::help::{add_help, add_keys, entry, tag};
use super::mixture::mixture_arg;
use crate::kernel::fit::{FitRow, T_DISTINCT_C};
use crate::kernel::Mixture;
use crate::plot::{self as figures, PlotOptions};

const CURVE_KEYS: &[&str] = &["title", "temperatures", "width", "height", "data"];
const PMV_KEYS: &[&str] = &[
    "title",
    "t",
    "temperatures",
    "width",
    "height",
    "data",
    "band",
];

/// Most temperatures one figure draws (beyond this the curves crowd).
pub const MAX_TEMPERATURES: usize = 8;

/// What a plot call was given, read and checked.
struct Request {
    model: Arc<dyn Mixture>,
    fit: Option<Arc<FitInfo>>,
    path: String,
    opts: PlotOptions,
    temps: Vec<f64>,
    data: bool,
    band: bool,
}

fn pixels(f: &Fields, key: &str, default: u32) -> mlua::Result<u32> {
    match f.get(key)?.as_ref() {
        None | Some(Value::Nil) => Ok(default),
        Some(v) => {
            let x = number(v, f.func(), key)?;
            if x.fract() != 0.0 || !(1.0..=100_000.0).contains(&x) {
                return Err(runtime(format!(
                    "{}: {key} must be a whole number of pixels, got {}",
                    f.func(),
                    super::format::fmt_number(x)
                )));
            }
            Ok(x as u32)
        }
    }
}

/// Distinct temperatures of a fit's rows (sorted; rows closer than
/// [`T_DISTINCT_C`] count as one), thinned to at most
/// [`MAX_TEMPERATURES`] spread over the range.
fn data_temperatures(rows: &[FitRow]) -> Vec<f64> {
    let mut ts: Vec<f64> = rows.iter().map(|r| r.t).collect();
    ts.sort_by(f64::total_cmp);
    ts.dedup_by(|a, b| (*a - *b).abs() <= T_DISTINCT_C);
    if ts.len() > MAX_TEMPERATURES {
        let n = ts.len();
        let k = MAX_TEMPERATURES;
        ts = (0..k).map(|i| ts[i * (n - 1) / (k - 1)]).collect();
    }
    ts
}

/// Default temperatures: the data's for a fitted mixture, else 10, 20 and
/// 30 °C where the model holds (or the middle of its range).
fn default_temperatures(model: &dyn Mixture, fit: Option<&FitInfo>) -> Vec<f64> {
    if let Some(info) = fit {
        let v = info.model.data_range();
        let ts: Vec<f64> = data_temperatures(&info.model.provenance().rows)
            .into_iter()
            .filter(|t| *t >= v.t_min && *t <= v.t_max)
            .collect();
        if !ts.is_empty() {
            return ts;
        }
    }
    let v = model.validity();
    let ts: Vec<f64> = [10.0, 20.0, 30.0]
        .into_iter()
        .filter(|t| *t >= v.t_min && *t <= v.t_max)
        .collect();
    if ts.is_empty() {
        vec![0.5 * (v.t_min + v.t_max)]
    } else {
        ts
    }
}

fn read_request(
    lua: &Lua,
    func: &str,
    m: &Value,
    path: &Value,
    opts: &Value,
    keys: &'static [&'static str],
) -> mlua::Result<Request> {
    let model = mixture_arg(m, func, "the first argument")?;
    let fit = fit_of(m);
    let Value::String(p) = path else {
        return Err(runtime(format!(
            "{func}: the second argument must be the path of the SVG file to write, got {}",
            describe_value(path)
        )));
    };
    let path = p.to_str()?.to_string();
    let empty;
    let opts = match opts {
        Value::Nil => {
            empty = Value::Table(lua.create_table()?);
            &empty
        }
        o => o,
    };
    let f = Fields::read(
        lua,
        opts,
        func,
        keys,
        "{title = \"…\", temperatures = {15, 25}}",
    )?;
    let title = match f.get("title")?.as_ref() {
        None | Some(Value::Nil) => None,
        Some(Value::String(s)) => Some(s.to_str()?.to_string()),
        Some(other) => {
            return Err(runtime(format!(
                "{func}: title must be a string, got {}",
                describe_value(other)
            )))
        }
    };
    let d = PlotOptions::default();
    let opts = PlotOptions {
        width: pixels(&f, "width", d.width)?,
        height: pixels(&f, "height", d.height)?,
        title,
    };
    let mut temps = match f.get("temperatures")?.as_ref() {
        None | Some(Value::Nil) => Vec::new(),
        Some(v) => match numbers(lua, v, func, "temperatures")? {
            Numbers::One(t) => vec![t],
            Numbers::Many(ts) => ts,
        },
    };
    if f.has("t") {
        if !temps.is_empty() {
            return Err(runtime(format!(
                "{func}: give the temperature as t or as temperatures, not both"
            )));
        }
        temps = vec![number(
            f.get("t")?.as_ref().unwrap_or(&Value::Nil),
            func,
            "t",
        )?];
    }
    if f.has("temperatures") && temps.is_empty() {
        return Err(runtime(format!(
            "{func}: temperatures is empty; give at least one temperature (°C)"
        )));
    }
    if temps.len() > MAX_TEMPERATURES {
        return Err(runtime(format!(
            "{func}: {} temperatures is too many for one figure; give at most {MAX_TEMPERATURES}",
            temps.len()
        )));
    }
    if temps.is_empty() {
        temps = default_temperatures(&*model, fit.as_deref());
    }
    let data = match f.opt_bool("data")? {
        Some(true) if fit.is_none() => {
            return Err(runtime(format!(
                "{func}: data = true draws the rows a mixture was fitted to, and '{}' is not a \
                 fitted mixture",
                model.name()
            )))
        }
        Some(b) => b,
        None => fit.is_some(),
    };
    let band = if keys.contains(&"band") {
        match f.opt_bool("band")? {
            Some(true) if fit.is_none() => {
                return Err(runtime(format!(
                    "{func}: band = true draws a fitted mixture's ±2u band, and '{}' is not a \
                     fitted mixture",
                    model.name()
                )))
            }
            Some(b) => b,
            None => fit.is_some(),
        }
    } else {
        false
    };
    Ok(Request {
        model,
        fit,
        path,
        opts,
        temps,
        data,
        band,
    })
}

fn rows_of(r: &Request) -> Option<&[FitRow]> {
    match (&r.fit, r.data) {
        (Some(info), true) => Some(&info.model.provenance().rows),
        _ => None,
    }
}

fn write_svg(lua: &Lua, func: &str, path: &str, svg: String) -> mlua::Result<()> {
    files::write_text(lua, path, svg.as_bytes())
        .map_err(|e| runtime(format!("{func}: {}", super::errors::describe(&e).message)))?;
    Ok(())
}

fn density(lua: &Lua, (m, path, opts): (Value, Value, Value)) -> mlua::Result<()> {
    let func = "plot.density";
    let r = read_request(lua, func, &m, &path, &opts, CURVE_KEYS)?;
    let svg = figures::density_vs_composition(&*r.model, &r.temps, rows_of(&r), &r.opts)
        .map_err(|e| runtime(format!("{func}: {e}")))?;
    write_svg(lua, func, &r.path, svg)
}

fn excess(lua: &Lua, (m, path, opts): (Value, Value, Value)) -> mlua::Result<()> {
    let func = "plot.excess";
    let r = read_request(lua, func, &m, &path, &opts, CURVE_KEYS)?;
    let svg = figures::excess_volume_vs_x(&*r.model, &r.temps, rows_of(&r), &r.opts)
        .map_err(|e| runtime(format!("{func}: {e}")))?;
    write_svg(lua, func, &r.path, svg)
}

fn pmv(lua: &Lua, (m, path, opts): (Value, Value, Value)) -> mlua::Result<()> {
    let func = "plot.pmv";
    let mut r = read_request(lua, func, &m, &path, &opts, PMV_KEYS)?;
    let given = matches!(&opts, Value::Table(t) if !t.raw_get::<Value>("t")?.is_nil() || !t.raw_get::<Value>("temperatures")?.is_nil());
    let t = match r.temps.as_slice() {
        [t] => *t,
        _ if !given => {
            // One panel pair per figure: the data temperature nearest the
            // middle of the range.
            let mid = 0.5 * (r.temps[0] + r.temps[r.temps.len() - 1]);
            let t = r
                .temps
                .iter()
                .copied()
                .min_by(|a, b| (a - mid).abs().total_cmp(&(b - mid).abs()))
                .unwrap_or(mid);
            r.temps = vec![t];
            t
        }
        many => {
            return Err(runtime(format!(
                "{func}: a partial-molar-volume figure is for one temperature, got {}; \
                 give t = … (or one value in temperatures) and draw one figure per temperature",
                many.len()
            )))
        }
    };
    let band = if r.band {
        r.fit.as_ref().map(|i| &*i.model)
    } else {
        None
    };
    let svg = figures::partial_molar_volumes_vs_x(&*r.model, t, rows_of(&r), band, &r.opts)
        .map_err(|e| runtime(format!("{func}: {e}")))?;
    write_svg(lua, func, &r.path, svg)
}

/// Adds `plot.density`, `plot.excess` and `plot.pmv` to the global `plot`
/// table, creating it if absent and keeping what other modules put there.
pub fn register(lua: &Lua) -> mlua::Result<()> {
    let globals = lua.globals();
    let ns: Table = match globals.raw_get::<Value>("plot")? {
        Value::Table(t) => t,
        Value::Nil => {
            let t = lua.create_table()?;
            globals.raw_set("plot", t.clone())?;
            t
        }
        other => {
            return Err(runtime(format!(
                "cannot register plot functions: the global 'plot' is already {}",
                describe_value(&other)
            )))
        }
    };
    tag(lua, Value::Table(ns.clone()), "plot")?;
    for (name, f) in [
        ("density", lua.create_function(density)?),
        ("excess", lua.create_function(excess)?),
        ("pmv", lua.create_function(pmv)?),
    ] {
        ns.raw_set(name, f.clone())?;
        tag(lua, Value::Function(f), &format!("plot.{name}"))?;
    }

    let mine = "plot.density(m, path, opts), plot.excess(m, path, opts) and\n\
                plot.pmv(m, path, opts) draw a mixture as an SVG file (written atomically,\n\
                only under the working directory or an --allow-path directory).";
    match entry(lua, "plot") {
        Some(e) if !e.doc.contains("plot.density") => {
            add_help(lua, "plot", &e.signature, &format!("{}\n{mine}", e.doc))?
        }
        Some(_) => {}
        None => add_help(lua, "plot", "plot (namespace)", mine)?,
    }
    let common = "opts (all optional): title, width and height (pixels; default 800 × 560),\n\
                  data (draw the rows a fitted mixture was fitted to; default true for a\n\
                  fitted mixture). A fitted mixture is drawn only within its data's range.";
    let entries: [(&str, &str, String, &[&str]); 3] = [
        (
            "plot.density",
            "plot.density(m, path[, {title=…, temperatures={…}, width=…, height=…, data=…}])",
            format!(
                "Density (kg/m³) against mass fraction of the first component, one curve\n\
                 per temperature (°C; default: the data's temperatures for a fitted\n\
                 mixture, else 10, 20, 30 °C), measured rows as points.\n{common}"
            ),
            CURVE_KEYS,
        ),
        (
            "plot.excess",
            "plot.excess(m, path[, {title=…, temperatures={…}, width=…, height=…, data=…}])",
            format!(
                "Excess molar volume V^E (cm³/mol) against mole fraction of the first\n\
                 component, one curve per temperature, the rows' V^E as points.\n{common}"
            ),
            CURVE_KEYS,
        ),
        (
            "plot.pmv",
            "plot.pmv(m, path[, {title=…, t=…, width=…, height=…, data=…, band=…}])",
            format!(
                "Partial molar volumes of both components (cm³/mol, two panels) against\n\
                 mole fraction at one temperature t (°C; default: the data temperature\n\
                 nearest the middle, or 20 °C). With data, tangent-intercept points from\n\
                 the rows at t; with band (default true for a fitted mixture), the fit's\n\
                 ±2 standard-uncertainty band.\n{common}"
            ),
            PMV_KEYS,
        ),
    ];
    for (name, sig, doc, keys) in entries {
        add_help(lua, name, sig, &doc)?;
        add_keys(lua, name, keys)?;
    }
    Ok(())
}
