//! `plot.bars(path, opts)`: a grouped bar chart written as an SVG file
//! (rendered by [`crate::plot_job`]), for reports such as pure alcohol per
//! tank. Added to the `plot` namespace, which is created if no other
//! module has made it yet. The file is written atomically, only under the
//! working directory or an allowed path.

use mlua::{Lua, Table, Value};

use super::convert::{describe_value, numbers, opt_number, Fields, Numbers};
use super::errors::{describe, runtime};
use super::files::write_text;
use super::help::{add_help, add_keys, tag};
use crate::plot_job::{bar_chart, BarChart, BarSeries, MAX_CATEGORIES, MAX_SERIES};

const BARS_KEYS: &[&str] = &[
    "title",
    "categories",
    "series",
    "y_label",
    "width",
    "height",
];
const SERIES_KEYS: &[&str] = &["name", "values"];

fn text(v: Option<&Value>, func: &str, key: &str) -> mlua::Result<Option<String>> {
    match v {
        None | Some(Value::Nil) => Ok(None),
        Some(Value::String(s)) => Ok(Some(s.to_str()?.to_string())),
        Some(Value::Integer(i)) => Ok(Some(i.to_string())),
        Some(Value::Number(x)) => Ok(Some(x.to_string())),
        Some(other) => Err(runtime(format!(
            "{func}: {key} must be a string, got {}",
            describe_value(other)
        ))),
    }
}

/// A list of up to `max` items, each converted by `f` (index from 1).
fn list<T>(
    v: Option<&Value>,
    func: &str,
    key: &str,
    max: usize,
    mut f: impl FnMut(usize, Value) -> mlua::Result<T>,
) -> mlua::Result<Vec<T>> {
    let t: &Table = match v {
        Some(Value::Table(t)) => t,
        None | Some(Value::Nil) => return Err(runtime(format!("{func}: {key} is required"))),
        Some(other) => {
            return Err(runtime(format!(
                "{func}: {key} must be a list, got {}",
                describe_value(other)
            )))
        }
    };
    let n = t.raw_len();
    if n == 0 || n > max {
        return Err(runtime(format!(
            "{func}: {key} must hold 1 to {max} items, got {n}"
        )));
    }
    (1..=n)
        .map(|i| match t.raw_get::<Value>(i)? {
            Value::Nil => Err(runtime(format!("{func}: {key}[{i}] is nil"))),
            v => f(i, v),
        })
        .collect()
}

fn size(f: &Fields, key: &str, default: u32) -> mlua::Result<u32> {
    match opt_number(f.get(key)?.as_ref(), f.func(), key)? {
        None => Ok(default),
        Some(x) if x.fract() == 0.0 && (0.0..=100_000.0).contains(&x) => Ok(x as u32),
        Some(x) => Err(runtime(format!(
            "{}: {key} must be a whole number of pixels, got {x}",
            f.func()
        ))),
    }
}

fn bars(lua: &Lua, (p, opts): (Value, Value)) -> mlua::Result<()> {
    let func = "plot.bars";
    let path = match &p {
        Value::String(s) => s.to_str()?.to_string(),
        other => {
            return Err(runtime(format!(
                "{func}: path must be a string such as 'out/chart.svg', got {}",
                describe_value(other)
            )))
        }
    };
    let f = Fields::read(
        lua,
        &opts,
        func,
        BARS_KEYS,
        "{categories = {'T01', 'T02'}, series = {{name = 'LPA', values = {120, 340}}}}",
    )?;
    let categories = list(
        f.get("categories")?.as_ref(),
        func,
        "categories",
        MAX_CATEGORIES,
        |i, v| text(Some(&v), func, &format!("categories[{i}]")).map(|s| s.unwrap_or_default()),
    )?;
    let series = list(
        f.get("series")?.as_ref(),
        func,
        "series",
        MAX_SERIES,
        |i, v| {
            let name = format!("{func}: series[{i}]");
            let sf = Fields::read(
                lua,
                &v,
                &name,
                SERIES_KEYS,
                "{name = 'LPA', values = {120, 340}}",
            )?;
            let label = text(sf.get("name")?.as_ref(), &name, "name")?
                .unwrap_or_else(|| format!("series {i}"));
            let values = match sf.get("values")?.as_ref() {
                Some(v) => numbers(lua, v, &name, "values")?,
                None => return Err(runtime(format!("{name}: values is required"))),
            };
            let values = match values {
                Numbers::Many(v) => v,
                Numbers::One(x) => vec![x],
            };
            Ok(BarSeries {
                name: label,
                values,
            })
        },
    )?;
    let chart = BarChart {
        title: text(f.get("title")?.as_ref(), func, "title")?.unwrap_or_default(),
        categories,
        series,
        y_label: text(f.get("y_label")?.as_ref(), func, "y_label")?.unwrap_or_default(),
        width: size(&f, "width", 900)?,
        height: size(&f, "height", 520)?,
    };
    let svg = bar_chart(&chart).map_err(|e| runtime(format!("{func}: {e}")))?;
    write_text(lua, &path, svg.as_bytes())
        .map_err(|e| runtime(format!("{func}: {}", describe(&e).message)))?;
    Ok(())
}

/// Adds `bars` to the `plot` namespace (creating the namespace if absent).
pub fn register(lua: &Lua) -> mlua::Result<()> {
    let ns: Table = match lua.globals().get::<Value>("plot")? {
        Value::Table(t) => t,
        _ => {
            let t = lua.create_table()?;
            lua.globals().set("plot", t.clone())?;
            tag(lua, Value::Table(t.clone()), "plot")?;
            add_help(
                lua,
                "plot",
                "plot (namespace)",
                "SVG charts written to files under the working directory or an\n\
                 allowed path: plot.bars(path, opts).",
            )?;
            t
        }
    };
    let f = lua.create_function(bars)?;
    ns.set("bars", f.clone())?;
    tag(lua, Value::Function(f), "plot.bars")?;
    add_help(
        lua,
        "plot.bars",
        "plot.bars(path, {categories={…}, series={{name=…, values={…}}, …}[, title=…, y_label=…, width=900, height=520]})",
        &format!(
            "Writes a grouped bar chart as SVG: one group per category (e.g. a\n\
             tank), one bar per series (up to {MAX_SERIES}), each series one finite\n\
             value per category; a legend, and the values over the bars when there\n\
             are at most 48 bars. y_label names the axis and its unit. The file is\n\
             replaced atomically, only under the working directory or an allowed path."
        ),
    )?;
    add_keys(lua, "plot.bars", BARS_KEYS)?;
    Ok(())
}
