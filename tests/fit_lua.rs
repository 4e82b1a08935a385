//! Fitted mixtures and plots from Lua, through the public [`Host`]: the
//! Lua fit against the kernel fit on the same rows, the methods of a
//! fitted mixture, save/load, the errors a user meets (too few rows, a
//! temperature order the data cannot carry, NaN and text cells, unknown
//! columns, bad component specs, evaluation outside the data), the SVG
//! files and the checked file access, and the demo script end to end.
//!
//! The data are synthetic: an invented two-component model (values chosen
//! here, of the size seen for alcohol–water systems) plus seeded noise.
#![cfg(feature = "lua")]

use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::time::Duration;

use meniscus::kernel::fit::{
    fit, rows_from_basis, FitRow, FitSpec, OrderChoice, RowBasis, TermChoice,
};
use meniscus::kernel::{Component, Mixture};
use meniscus::lua::{Host, HostOptions};
use mlua::Table;

// ---- helpers ------------------------------------------------------------

mod common;
use common::{eval, fails_with, lua_str, num, table, text};

fn host() -> Host {
    host_with(HostOptions::default())
}

fn host_with(options: HostOptions) -> Host {
    common::quiet_host(HostOptions {
        timeout: Some(Duration::from_secs(60)),
        ..options
    })
}

/// A directory under the crate's target directory (inside the working
/// directory the tests run in, so scripts may use it).
fn scratch_dir(name: &str) -> PathBuf {
    common::scratch_dir("fit_lua", name)
}

// ---- synthetic data -------------------------------------------------------

const M1: f64 = 46.07; // g/mol, "solvent A"
const M2: f64 = 18.015; // g/mol, water

fn components() -> [Component; 2] {
    [Component::new("solvent A", M1), Component::new("water", M2)]
}

/// The invented truth: ρ in kg/m³ at % mass `abm` of A and `t` °C.
fn true_density(abm: f64, t: f64) -> f64 {
    let w = abm / 100.0;
    let (n1, n2) = (w / M1, (1.0 - w) / M2);
    let x = n1 / (n1 + n2);
    let d = t - 20.0;
    let r1 = 789.3 - 0.84 * d - 0.0009 * d * d;
    let r2 = 998.2 - 0.21 * d - 0.0045 * d * d;
    let v1 = 1000.0 * M1 / r1;
    let v2 = 1000.0 * M2 / r2;
    let a = [-3.6 + 0.01 * d, 1.2 - 0.004 * d, -0.9, 0.6];
    let z = 2.0 * x - 1.0;
    let p: f64 = a.iter().rev().fold(0.0, |acc, ak| acc * z + ak);
    let vm = x * v1 + (1.0 - x) * v2 + x * (1.0 - x) * p;
    1000.0 * (x * M1 + (1.0 - x) * M2) / vm
}

/// Seeded Gaussian noise (xorshift64 + Box–Muller).
struct Noise(u64);

impl Noise {
    fn uniform(&mut self) -> f64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        ((self.0 >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn gauss(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

/// (abm, density, t) rows: 0–100 % mass in 13 steps, at each of `temps`,
/// noise of `sigma` kg/m³, densities rounded to 0.001 kg/m³.
fn synthetic(temps: &[f64], sigma: f64) -> Vec<(f64, f64, f64)> {
    let mut noise = Noise(0x9E37_79B9_7F4A_7C15);
    let comps = [
        0.0, 5.0, 10.0, 15.0, 20.0, 30.0, 40.0, 50.0, 60.0, 70.0, 80.0, 90.0, 100.0,
    ];
    let mut rows = Vec::new();
    for &t in temps {
        for &c in &comps {
            let rho = true_density(c, t) + sigma * noise.gauss();
            rows.push((c, (rho * 1000.0).round() / 1000.0, t));
        }
    }
    rows
}

fn csv_text(rows: &[(f64, f64, f64)]) -> String {
    let mut s = String::from("sample,abm_pct,t_c,rho\n");
    for (i, (c, rho, t)) in rows.iter().enumerate() {
        writeln!(s, "S{:03},{c},{t},{rho}", i + 1).unwrap();
    }
    s
}

fn write_csv(dir: &Path, name: &str, rows: &[(f64, f64, f64)]) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, csv_text(rows)).unwrap();
    p
}

/// Lua source of a table of row tables.
fn lua_rows(rows: &[(f64, f64, f64)]) -> String {
    let mut s = String::from("{");
    for (c, rho, t) in rows {
        write!(s, "{{abm = {c:?}, rho = {rho:?}, t = {t:?}}},").unwrap();
    }
    s.push('}');
    s
}

/// Lua source of a table of columns.
fn lua_columns(rows: &[(f64, f64, f64)]) -> String {
    let col = |f: &dyn Fn(&(f64, f64, f64)) -> f64| {
        rows.iter()
            .map(|r| format!("{:?}", f(r)))
            .collect::<Vec<_>>()
            .join(", ")
    };
    format!(
        "{{abm = {{{}}}, rho = {{{}}}, t = {{{}}}}}",
        col(&|r| r.0),
        col(&|r| r.1),
        col(&|r| r.2)
    )
}

const COMPONENTS_LUA: &str =
    "{{name = 'solvent A', molar_mass = 46.07}, {name = 'water', molar_mass = 18.015}}";

fn kernel_fit(rows: &[(f64, f64, f64)]) -> meniscus::kernel::fit::Fit {
    let fit_rows = rows_from_basis(RowBasis::Abm, rows, &components()).unwrap();
    let mut spec = FitSpec::new("solvent A–water", components());
    // What mixture.fit records for a table of rows.
    spec.source = "a Lua table of rows".into();
    fit(&spec, &fit_rows).unwrap()
}

/// A host with `m` fitted to the synthetic data at 15, 25, 35 °C.
fn fitted_host() -> (Host, meniscus::kernel::fit::Fit) {
    let rows = synthetic(&[15.0, 25.0, 35.0], 0.03);
    let h = host();
    eval(
        &h,
        &format!(
            "m = mixture.fit{{data = {}, basis = 'abm', density = 'rho', components = {COMPONENTS_LUA}}}",
            lua_rows(&rows)
        ),
    );
    (h, kernel_fit(&rows))
}

fn coefficients(h: &Host, m: &str) -> Vec<Vec<f64>> {
    let t = table(h, &format!("{m}:fit_info().coefficients"));
    t.sequence_values::<Table>()
        .map(|row| {
            row.unwrap()
                .sequence_values::<f64>()
                .map(|v| v.unwrap())
                .collect()
        })
        .collect()
}

// ---- the fit against the kernel -------------------------------------------

#[test]
fn lua_fit_reproduces_the_kernel_fit_from_csv_rows_and_columns() {
    let rows = synthetic(&[15.0, 25.0, 35.0], 0.03);
    let want = kernel_fit(&rows);
    assert!(want.model.terms() >= 3, "the data carry several terms");
    let d = scratch_dir("same");
    let csv = write_csv(&d, "data.csv", &rows);
    let h = host();
    eval(
        &h,
        &format!(
            "a = mixture.fit{{data = {}, basis = 'abm', composition = 'abm_pct', density = 'rho', \
             t = 't_c', components = {COMPONENTS_LUA}}}",
            lua_str(&csv)
        ),
    );
    eval(
        &h,
        &format!(
            "b = mixture.fit{{data = {}, basis = 'abm', density = 'rho', components = {COMPONENTS_LUA}}}",
            lua_rows(&rows)
        ),
    );
    eval(
        &h,
        &format!(
            "c = mixture.fit{{data = {}, basis = 'abm', density = 'rho', components = {COMPONENTS_LUA}}}",
            lua_columns(&rows)
        ),
    );
    for m in ["a", "b", "c"] {
        assert_eq!(coefficients(&h, m), want.model.coefficients(), "{m}");
        assert_eq!(
            num(&h, &format!("{m}:fit_info().terms")) as usize,
            want.model.terms()
        );
        assert_eq!(
            num(&h, &format!("{m}:fit_info().t_order")) as usize,
            want.model.t_order()
        );
        assert_eq!(
            num(&h, &format!("{m}:fit_info().residual_sd")),
            want.report.residual_sd_rho
        );
        // Same report apart from the provenance lines below it.
        let report = text(&h, &format!("{m}:report()"));
        assert!(
            report.starts_with(&want.report.to_string()),
            "{m}: {report}"
        );
    }
    // The CSV path is the default source, kept with the model.
    assert!(text(&h, "a:fit_info().source").contains("data.csv"));
    assert_eq!(text(&h, "b:fit_info().source"), "a Lua table of rows");
}

/// Lua source adding `rows` to the sheet `s`, one `s:add{…}` per row.
fn sheet_adds(rows: &[(f64, f64, f64)]) -> String {
    let mut src = String::new();
    for (c, rho, t) in rows {
        writeln!(src, "s:add{{abm = {c:?}, rho = {rho:?}, t = {t:?}}}").unwrap();
    }
    src
}

#[test]
fn a_sheet_is_fit_data_with_its_formula_columns() {
    let rows = synthetic(&[15.0, 25.0, 35.0], 0.03);
    let want = kernel_fit(&rows);
    let h = host();
    eval(
        &h,
        &format!("s = sheet.new{{'abm', 'rho', 't'}}\n{}", sheet_adds(&rows)),
    );
    eval(
        &h,
        &format!(
            "m = mixture.fit{{data = s, basis = 'abm', density = 'rho', components = {COMPONENTS_LUA}}}"
        ),
    );
    assert_eq!(coefficients(&h, "m"), want.model.coefficients());
    assert_eq!(
        num(&h, "m:fit_info().residual_sd"),
        want.report.residual_sd_rho
    );
    assert_eq!(
        text(&h, "m:fit_info().source"),
        format!("a sheet of {} rows", rows.len())
    );
    // A formula column is read with its current values: `rho * 1` is
    // exact, so the fit is the same; after a change to a data cell the
    // formula column follows it and so does the fit.
    eval(&h, "s:formula('rho_f', 'rho * 1')");
    eval(
        &h,
        &format!(
            "mf = mixture.fit{{data = s, basis = 'abm', density = 'rho_f', components = {COMPONENTS_LUA}}}"
        ),
    );
    assert_eq!(coefficients(&h, "mf"), want.model.coefficients());
    eval(&h, "s:set(3, 'rho', s:get(3, 'rho') + 0.5)");
    assert_eq!(num(&h, "s:get(3, 'rho_f')"), rows[2].1 + 0.5);
    eval(
        &h,
        &format!(
            "mg = mixture.fit{{data = s, basis = 'abm', density = 'rho_f', components = {COMPONENTS_LUA}}}"
        ),
    );
    let mut moved = rows.clone();
    moved[2].1 += 0.5;
    assert_eq!(
        coefficients(&h, "mg"),
        kernel_fit(&moved).model.coefficients()
    );
    // The fit leaves the sheet as it was.
    assert_eq!(num(&h, "s:nrows()") as usize, rows.len());
    assert_eq!(num(&h, "s:ncols()"), 4.0);
}

#[test]
fn sheet_data_errors_name_the_sheet_row_and_column() {
    let rows = synthetic(&[20.0], 0.0);
    let h = host();
    eval(
        &h,
        &format!("s = sheet.new{{'abm', 'rho', 't'}}\n{}", sheet_adds(&rows)),
    );
    fails_with(
        &h,
        &fit_call("s", ", density = 'dens'"),
        &["no column 'dens'", "in the sheet", "'rho'", "'abm'", "'t'"],
    );
    eval(&h, "s:set(4, 'rho', 'n/a')");
    fails_with(
        &h,
        &fit_call("s", ""),
        &["the sheet, data row 4", "'rho'", "n/a"],
    );
    eval(&h, "s:set(4, 'rho', nil)");
    fails_with(
        &h,
        &fit_call("s", ""),
        &["the sheet, data row 4", "'rho'", "empty"],
    );
    // An empty sheet has no rows to fit.
    eval(&h, "e = sheet.new{'abm', 'rho', 't'}");
    fails_with(&h, &fit_call("e", ""), &["no rows"]);
}

#[test]
fn fixed_choices_weights_and_given_pure_densities_reach_the_kernel() {
    let rows = synthetic(&[15.0, 25.0, 35.0], 0.03);
    let comps = components();
    let mut fit_rows = rows_from_basis(RowBasis::Abm, &rows, &comps).unwrap();
    for r in &mut fit_rows {
        *r = r.with_u_rho(0.03);
    }
    let mut spec = FitSpec::new("solvent A–water", comps.clone());
    spec.terms = TermChoice::Fixed(3);
    spec.t_order = OrderChoice::Fixed(1);
    let want = fit(&spec, &fit_rows).unwrap();
    let h = host();
    // u_density: a column of standard uncertainties.
    let with_u: String = rows
        .iter()
        .map(|(c, rho, t)| format!("{{abm = {c:?}, rho = {rho:?}, t = {t:?}, u = 0.03}},"))
        .collect();
    eval(
        &h,
        &format!(
            "m = mixture.fit{{data = {{{with_u}}}, basis = 'abm', density = 'rho', u_density = 'u', \
             terms = 3, t_order = 1, components = {COMPONENTS_LUA}}}"
        ),
    );
    assert_eq!(coefficients(&h, "m"), want.model.coefficients());
    assert_eq!(
        num(&h, "m:fit_info().birge_ratio"),
        want.report.birge_ratio.unwrap()
    );
    // weight: 1/u² gives the same fit (up to the rounding of 1/√(1/u²)).
    let with_w: String = rows
        .iter()
        .map(|(c, rho, t)| {
            format!(
                "{{abm = {c:?}, rho = {rho:?}, t = {t:?}, wt = {:?}}},",
                1.0 / (0.03f64 * 0.03)
            )
        })
        .collect();
    eval(
        &h,
        &format!(
            "mw = mixture.fit{{data = {{{with_w}}}, basis = 'abm', density = 'rho', weight = 'wt', \
             terms = 3, t_order = 1, components = {COMPONENTS_LUA}}}"
        ),
    );
    for (a, b) in coefficients(&h, "mw")
        .iter()
        .flatten()
        .zip(want.model.coefficients().iter().flatten())
    {
        assert!((a - b).abs() <= 1e-9 * b.abs().max(1e-6), "{a} vs {b}");
    }
    // Given pure density of water (a polynomial), by component name.
    eval(
        &h,
        &format!(
            "mp = mixture.fit{{data = {}, basis = 'abm', density = 'rho', components = {COMPONENTS_LUA}, \
             pure = {{water = {{t0 = 20, coefficients = {{998.2, -0.21, -0.0045}}}}}}}}",
            lua_rows(&rows)
        ),
    );
    assert_eq!(text(&h, "mp:fit_info().pure2.origin"), "given");
    assert_eq!(text(&h, "mp:fit_info().pure1.origin"), "fitted");
    let c = table(&h, "mp:fit_info().pure2.coefficients");
    assert_eq!(c.get::<f64>(2).unwrap(), -0.21);
}

// ---- methods of a fitted mixture --------------------------------------------

#[test]
fn fitted_mixture_answers_every_mixture_method() {
    let (h, want) = fitted_host();
    let k = &want.model;
    assert_eq!(
        num(&h, "m:density{abm = 30, t = 25}"),
        k.density(0.3, 25.0).unwrap()
    );
    // Strength from a density of the model comes back to the composition.
    let rho = k.density(0.42, 22.0).unwrap();
    let abm = num(&h, &format!("m:strength{{density = {rho:?}, t = 22}}.abm"));
    assert!((abm - 42.0).abs() < 1e-6, "{abm}");
    let v = eval(&h, "m:pmv{w = 0.3, t = 25}");
    let got: Vec<f64> = v.iter().map(|x| x.as_f64().unwrap()).collect();
    assert_eq!(got, k.partial_molar_volumes(0.3, 25.0).unwrap().to_vec());
    let c = table(&h, "m:convert{abm = 30}");
    assert_eq!(c.get::<f64>("w").unwrap(), 0.3);
    assert_eq!(c.get::<f64>("x").unwrap(), k.x_from_w(0.3));
    assert_eq!(
        num(&h, "m:excess_volume{x = 0.3, t = 15}"),
        k.excess_molar_volume(meniscus::kernel::composition::w_from_x(0.3, M1, M2), 15.0)
            .unwrap()
    );
    // Arrays give vectors, element by element.
    let v = num(&h, "m:density{abm = {10, 20, 30}, t = 25}:max()");
    assert_eq!(v, k.density(0.1, 25.0).unwrap());
    let info = table(&h, "m:validity()");
    assert_eq!(info.get::<f64>("t_min").unwrap(), 15.0);
    assert_eq!(info.get::<f64>("t_max").unwrap(), 35.0);
    assert!(text(&h, "m:describe()").contains("solvent A"));
}

#[test]
fn uncertainties_and_cross_check_come_from_the_fit() {
    let (h, want) = fitted_host();
    let k = &want.model;
    let d = table(&h, "m:density_u{abm = 40, t = 20}");
    let e = k.density_u(0.4, 20.0).unwrap();
    assert_eq!(d.get::<f64>("density").unwrap(), e.value);
    assert_eq!(d.get::<f64>("u").unwrap(), e.u);
    assert!(e.u > 0.0);
    let p = table(&h, "m:pmv_u{w = 0.25, t = 30}");
    let [a, b] = k.partial_molar_volumes_u(0.25, 30.0).unwrap();
    assert_eq!(p.get::<f64>("v1").unwrap(), a.value);
    assert_eq!(p.get::<f64>("u1").unwrap(), a.u);
    assert_eq!(p.get::<f64>("v2").unwrap(), b.value);
    assert_eq!(p.get::<f64>("u2").unwrap(), b.u);
    let x = table(&h, "m:excess_volume_u{w = 0.5, t = 25}");
    let ve = k.excess_molar_volume_u(0.5, 25.0).unwrap();
    assert_eq!(x.get::<f64>("ve").unwrap(), ve.value);
    assert_eq!(x.get::<f64>("u").unwrap(), ve.u);
    // The tangent cross-check beside the fitted values.
    let cc = table(&h, "m:crosscheck{x = {0.1, 0.3, 0.6}, t = 25}");
    let kc = k.cross_check(25.0, 0.05, &[0.1, 0.3, 0.6], None).unwrap();
    let v1: Vec<f64> = cc
        .get::<Table>("v1")
        .unwrap()
        .sequence_values::<f64>()
        .map(|v| v.unwrap())
        .collect();
    let tan: Vec<f64> = cc
        .get::<Table>("v1_tangent")
        .unwrap()
        .sequence_values::<f64>()
        .map(|v| v.unwrap())
        .collect();
    assert_eq!(
        v1,
        kc.rows
            .iter()
            .map(|r| r.fitted[0].value)
            .collect::<Vec<_>>()
    );
    assert_eq!(tan, kc.rows.iter().map(|r| r.local.v1).collect::<Vec<_>>());
    assert_eq!(cc.get::<String>("text").unwrap(), kc.to_string());
    fails_with(
        &h,
        "m:crosscheck{x = {0.1}, t = 20}",
        &["3 or more compositions"],
    );
    fails_with(
        &h,
        "m:crosscheck{x = {0.1}, t = 25, window = 2}",
        &["window", "at least 3"],
    );
    // The data come back as columns.
    assert_eq!(num(&h, "#m:fit_data().w"), 39.0);
}

#[test]
fn the_report_reads_well_and_names_its_source() {
    let (h, _) = fitted_host();
    eval(&h, "print(m:report())");
    let out = h.take_output();
    for part in [
        "Fit of solvent A–water",
        "Term selection (AICc",
        "← chosen",
        "sd of density",
        "Data: 39 rows from a Lua table of rows",
        "not a certified table",
    ] {
        assert!(out.contains(part), "report lacks {part:?}:\n{out}");
    }
}

#[test]
fn fit_methods_have_help_and_complete() {
    let (h, _) = fitted_host();
    let (_, c) = h.completions("m:rep", 5);
    assert!(c.contains(&"report".to_string()), "{c:?}");
    let (_, c) = h.completions("mixture.lo", 10);
    assert!(c.contains(&"load".to_string()), "{c:?}");
    let (_, c) = h.completions("m:crosscheck{win", 16);
    assert!(c.contains(&"window".to_string()), "{c:?}");
    assert!(text(&h, "tostring(m)").contains("solvent A–water"));
    eval(&h, "help(m.crosscheck)");
    assert!(h.take_output().contains("tangent"));
    assert!(h.help_text("mixture").contains("mixture.fit"));
    // The reference model is not offered methods it does not have.
    eval(&h, "r = mixture.ethanol_water()");
    let (_, c) = h.completions("r:de", 4);
    assert_eq!(c, vec!["density".to_string(), "describe".to_string()]);
    let (_, c) = h.completions("m:de", 4);
    assert!(c.contains(&"density_u".to_string()), "{c:?}");
}

#[test]
fn fit_only_methods_refuse_a_mixture_that_was_not_fitted() {
    let h = host();
    eval(&h, "r = mixture.ethanol_water()");
    for call in [
        "r:report()",
        "r:save('x.json')",
        "r:density_u{abv = 40}",
        "r:pmv_u{abv = 40}",
        "r:crosscheck{x = {0.1}, t = 20}",
        "r:fit_info()",
    ] {
        fails_with(&h, call, &["not a fitted mixture", "mixture.fit"]);
    }
}

// ---- save and load ---------------------------------------------------------

#[test]
fn save_then_load_gives_identical_results() {
    let (h, want) = fitted_host();
    let d = scratch_dir("saveload");
    let path = d.join("model.json");
    eval(&h, &format!("m:save({})", lua_str(&path)));
    let saved = std::fs::read_to_string(&path).unwrap();
    assert_eq!(saved, want.model.to_json().unwrap());
    assert!(saved.contains("\"format\": \"meniscus-fitted-mixture\""));
    assert!(saved.contains("\"source\": \"a Lua table of rows\""));
    eval(&h, &format!("l = mixture.load({})", lua_str(&path)));
    for src in [
        "{m:density{abm = 33, t = 17}, l:density{abm = 33, t = 17}}",
        "{m:density_u{w = 0.7, t = 31}.u, l:density_u{w = 0.7, t = 31}.u}",
        "{m:pmv_u{x = 0.2, t = 25}.u2, l:pmv_u{x = 0.2, t = 25}.u2}",
        "{m:strength{density = 930, t = 21}.abm, l:strength{density = 930, t = 21}.abm}",
        "{m:excess_volume{abm = 50, t = 35}, l:excess_volume{abm = 50, t = 35}}",
        "{select(2, m:pmv{abm = 60, t = 19}), select(2, l:pmv{abm = 60, t = 19})}",
    ] {
        let t = table(&h, src);
        let (a, b) = (t.get::<f64>(1).unwrap(), t.get::<f64>(2).unwrap());
        assert_eq!(a, b, "{src}");
    }
    assert_eq!(coefficients(&h, "l"), coefficients(&h, "m"));
    let report = text(&h, "l:report()");
    assert!(
        report.contains("recomputed from the 39 saved rows"),
        "{report}"
    );
    assert!(!report.contains("WARNING"), "{report}");
    // Saving the loaded model writes the same file.
    let again = d.join("again.json");
    eval(&h, &format!("l:save({})", lua_str(&again)));
    assert_eq!(std::fs::read_to_string(&again).unwrap(), saved);
}

#[test]
fn an_edited_model_file_is_flagged_in_the_report() {
    let (h, _) = fitted_host();
    let d = scratch_dir("edited");
    let path = d.join("model.json");
    eval(&h, &format!("m:save({})", lua_str(&path)));
    let mut v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&path).unwrap()).unwrap();
    let a00 = v["excess"]["coefficients"][0][0].as_f64().unwrap();
    v["excess"]["coefficients"][0][0] = serde_json::json!(a00 + 0.05);
    std::fs::write(&path, serde_json::to_string_pretty(&v).unwrap()).unwrap();
    eval(&h, &format!("e = mixture.load({})", lua_str(&path)));
    assert!(text(&h, "e:report()").contains("WARNING: the saved coefficients differ"));
    // A damaged file is refused with the file named.
    std::fs::write(
        &path,
        "{\"format\": \"meniscus-fitted-mixture\", \"version\": 99}",
    )
    .unwrap();
    fails_with(
        &h,
        &format!("mixture.load({})", lua_str(&path)),
        &["mixture.load", "model.json", "version 99"],
    );
}

// ---- errors ------------------------------------------------------------------

fn fit_call(data: &str, extra: &str) -> String {
    format!(
        "mixture.fit{{data = {data}, basis = 'abm', density = 'rho', components = {COMPONENTS_LUA}{extra}}}"
    )
}

#[test]
fn too_few_rows_are_refused() {
    let h = host();
    let rows = [
        (0.0, 998.2, 20.0),
        (20.0, 968.0, 20.0),
        (50.0, 914.0, 20.0),
        (100.0, 789.3, 20.0),
    ];
    fails_with(
        &h,
        &fit_call(&lua_rows(&rows), ""),
        &["mixture.fit", "too few"],
    );
    fails_with(
        &h,
        &fit_call(&lua_rows(&rows), ", terms = 3"),
        &["too few", "3 Redlich–Kister terms"],
    );
    // Only pure rows.
    let pure = [(0.0, 998.2, 20.0), (100.0, 789.3, 20.0)];
    fails_with(&h, &fit_call(&lua_rows(&pure), ""), &["no mixture rows"]);
}

#[test]
fn a_temperature_order_needs_that_many_temperatures() {
    let h = host();
    let rows = synthetic(&[25.0], 0.03);
    fails_with(
        &h,
        &fit_call(&lua_rows(&rows), ", t_order = 1"),
        &["one temperature", "25", "order 1"],
    );
    // The same data with automatic order fit fine, at one temperature…
    eval(&h, &format!("m = {}", fit_call(&lua_rows(&rows), "")));
    assert_eq!(num(&h, "m:fit_info().t_order"), 0.0);
    // …and may give the temperature as one number for every row.
    let no_t: String = rows
        .iter()
        .map(|(c, rho, _)| format!("{{abm = {c:?}, rho = {rho:?}}},"))
        .collect();
    eval(
        &h,
        &format!("n = {}", fit_call(&format!("{{{no_t}}}"), ", t = 25")),
    );
    assert_eq!(coefficients(&h, "n"), coefficients(&h, "m"));
    fails_with(
        &h,
        &fit_call(&lua_rows(&rows), ", t_order = 3"),
        &["t_order", "0 to 2"],
    );
    fails_with(
        &h,
        &fit_call(&lua_rows(&rows), ", terms = 0"),
        &["terms", "1 to 16"],
    );
    fails_with(
        &h,
        &fit_call(&lua_rows(&rows), ", terms = 2.5"),
        &["terms", "2.5"],
    );
}

#[test]
fn nan_and_text_cells_are_refused_with_their_row() {
    let h = host();
    let mut rows = synthetic(&[20.0], 0.0);
    // Lua rows: 0/0 is NaN.
    let mut src = lua_rows(&rows);
    src = src.replacen(&format!("rho = {:?}", rows[2].1), "rho = 0/0", 1);
    fails_with(&h, &fit_call(&src, ""), &["data[3].rho", "finite"]);
    // Lua columns.
    let cols = lua_columns(&rows).replacen(&format!("{:?}", rows[4].1), "0/0", 1);
    fails_with(&h, &fit_call(&cols, ""), &["data.rho[5]", "finite"]);
    // CSV: NaN is refused by the reader with its line.
    let d = scratch_dir("nan");
    rows[3].1 = f64::NAN;
    let p = write_csv(&d, "nan.csv", &rows);
    let call = format!(
        "mixture.fit{{data = {}, basis = 'abm', composition = 'abm_pct', density = 'rho', t = 't_c', \
         components = {COMPONENTS_LUA}}}",
        lua_str(&p)
    );
    fails_with(&h, &call, &["nan.csv", "line 5"]);
    // CSV: a text cell in the density column names the row and column.
    let text_csv = csv_text(&synthetic(&[20.0], 0.0));
    let lines: Vec<&str> = text_csv.lines().collect();
    let mut fields: Vec<String> = lines[6].split(',').map(String::from).collect();
    fields[3] = "n/a".into();
    let mut fixed: Vec<String> = lines.iter().map(|s| s.to_string()).collect();
    fixed[6] = fields.join(",");
    let p = d.join("text.csv");
    std::fs::write(&p, fixed.join("\n") + "\n").unwrap();
    let call = format!(
        "mixture.fit{{data = {}, basis = 'abm', composition = 'abm_pct', density = 'rho', t = 't_c', \
         components = {COMPONENTS_LUA}}}",
        lua_str(&p)
    );
    fails_with(&h, &call, &["text.csv", "data row 6", "'rho'", "n/a"]);
}

#[test]
fn unknown_columns_are_named_with_the_ones_there_are() {
    let h = host();
    let rows = synthetic(&[20.0], 0.0);
    fails_with(
        &h,
        &format!(
            "mixture.fit{{data = {}, basis = 'abm', density = 'dens', components = {COMPONENTS_LUA}}}",
            lua_rows(&rows)
        ),
        &["no column 'dens'", "density", "'rho'"],
    );
    let d = scratch_dir("unknown");
    let p = write_csv(&d, "data.csv", &rows);
    fails_with(
        &h,
        &format!(
            "mixture.fit{{data = {}, basis = 'abm', density = 'rho', components = {COMPONENTS_LUA}}}",
            lua_str(&p)
        ),
        &["no column 'abm'", "data.csv", "'abm_pct'", "composition"],
    );
    // A row missing a field that the first row has.
    let mut src = lua_rows(&rows);
    src = src.replacen(&format!(", rho = {:?}", rows[1].1), "", 1);
    fails_with(&h, &fit_call(&src, ""), &["data[2]", "'rho'"]);
    // Columns of different lengths.
    fails_with(
        &h,
        &fit_call(
            "{abm = {0, 50, 100}, rho = {998, 914}, t = {20, 20, 20}}",
            "",
        ),
        &["data.rho", "same length"],
    );
    // Columns that are not used may hold anything (sample names here).
    let rows20 = synthetic(&[20.0], 0.0);
    let names: Vec<String> = (1..=rows20.len()).map(|i| format!("'S{i}'")).collect();
    let cols =
        lua_columns(&rows20).replacen('{', &format!("{{sample = {{{}}}, ", names.join(", ")), 1);
    eval(&h, &format!("mc = {}", fit_call(&cols, ", t_order = 0")));
    assert_eq!(num(&h, "mc:fit_info().rows"), rows20.len() as f64);
    // An unknown key is not silently ignored.
    fails_with(
        &h,
        &fit_call(&lua_rows(&rows), ", temperature = 't'"),
        &["unknown key 'temperature'"],
    );
    fails_with(
        &h,
        &fit_call(&lua_rows(&rows), ", basis = 'abv'"),
        &["basis", "abv"],
    );
}

#[test]
fn wrong_component_specs_are_refused() {
    let h = host();
    let rows = lua_rows(&synthetic(&[20.0], 0.0));
    for (comps, fragments) in [
        ("{{name = 'a', molar_mass = 46}}", &["two tables"][..]),
        ("nil", &["components must be two tables"][..]),
        (
            "{{name = 'a', molar_mass = -46}, {name = 'water', molar_mass = 18}}",
            &["components[1]", "positive", "-46"][..],
        ),
        (
            "{{molar_mass = 46}, {name = 'water', molar_mass = 18}}",
            &["components[1] needs a name"][..],
        ),
        (
            "{{name = 'a', molar_mass = 46}, {name = 'water'}}",
            &["components[2]", "molar_mass"][..],
        ),
        (
            "{{name = 'a', molar_mass = 46}, {name = 'water', mm = 18}}",
            &["unknown key 'mm'"][..],
        ),
        (
            "{{name = 'water', molar_mass = 46}, {name = 'water', molar_mass = 18}}",
            &["different names"][..],
        ),
        ("'ethanol, water'", &["two tables"][..]),
    ] {
        let call = format!(
            "mixture.fit{{data = {rows}, basis = 'abm', density = 'rho', components = {comps}}}"
        );
        fails_with(&h, &call, fragments);
    }
    // A composition outside its basis names the row.
    let bad = lua_rows(&[(0.0, 998.2, 20.0), (120.0, 900.0, 20.0)]);
    fails_with(&h, &fit_call(&bad, ""), &["data[2]", "120", "0 to 100"]);
}

#[test]
fn evaluating_outside_the_data_is_an_error_naming_the_range() {
    let (h, _) = fitted_host();
    fails_with(
        &h,
        "m:density{abm = 50, t = 40}",
        &["density", "40", "outside the valid range 15 to 35"],
    );
    fails_with(
        &h,
        "m:density_u{abm = 50, t = 10}",
        &["density_u", "10", "15 to 35"],
    );
    fails_with(
        &h,
        "m:pmv{abm = {20, 30}, t = {25, 36}}",
        &["pmv", "index 2", "15 to 35"],
    );
    // help says so.
    let help = h.help_text("mixture.fit");
    assert!(help.contains("Evaluating outside"), "{help}");
    assert!(help.contains("is an error"), "{help}");
}

#[test]
fn data_of_the_wrong_shape_is_refused() {
    let h = host();
    fails_with(&h, &fit_call("42", ""), &["data must be a CSV file path"]);
    fails_with(&h, &fit_call("{}", ""), &["empty"]);
    fails_with(
        &h,
        &fit_call("{{abm = 1, rho = 990, t = 20}, x = 1}", ""),
        &["not both"],
    );
    fails_with(
        &h,
        &fit_call("{1, 2, 3}", ""),
        &["data[1] must be a row table"],
    );
    fails_with(
        &h,
        &fit_call("'no-such-file.csv'", ""),
        &["no-such-file.csv"],
    );
    fails_with(&h, &fit_call("'/etc/passwd'", ""), &["outside"]);
}

#[test]
fn the_fit_counts_its_working_memory_against_the_limit() {
    let h = host_with(HostOptions {
        memory_limit: 16 * 1024 * 1024,
        ..HostOptions::default()
    });
    // 100 000 rows as vectors (2.4 MB); the fit would work with ~64 MB.
    eval(
        &h,
        "r = mixture.ethanol_water(); w = linspace(0.01, 0.99, 100000); d = r:density{w = w, t = 20}",
    );
    let call = "mixture.fit{data = {w = w, density = d}, t = 20, components =                 {{name = 'ethanol', molar_mass = 46.07}, {name = 'water', molar_mass = 18.015}}}";
    fails_with(
        &h,
        call,
        &["mixture.fit", "not enough memory for 8000000 values"],
    );
    // The state is still usable, and a smaller fit goes through.
    eval(
        &h,
        "w = linspace(0, 1, 200); d = r:density{w = w, t = 20};          f = mixture.fit{data = {w = w, density = d}, t = 20, components =          {{name = 'ethanol', molar_mass = 46.07}, {name = 'water', molar_mass = 18.015}}}",
    );
    assert_eq!(num(&h, "f:fit_info().rows"), 200.0);
}

// ---- files ------------------------------------------------------------------

#[test]
fn writing_outside_allowed_directories_is_refused() {
    let (h, _) = fitted_host();
    let outside = std::env::temp_dir().join(format!("meniscus-fitlua-{}", std::process::id()));
    std::fs::create_dir_all(&outside).unwrap();
    let target = outside.join("model.json");
    fails_with(
        &h,
        &format!("m:save({})", lua_str(&target)),
        &["save", "outside"],
    );
    assert!(!target.exists());
    #[cfg(feature = "plot")]
    {
        let svg = outside.join("d.svg");
        fails_with(
            &h,
            &format!("plot.density(m, {})", lua_str(&svg)),
            &["plot.density", "outside"],
        );
        assert!(!svg.exists());
    }
    // Allowed once the user allows the directory.
    let h2 = host_with(HostOptions {
        allow_paths: vec![outside.clone()],
        ..HostOptions::default()
    });
    let rows = synthetic(&[15.0, 25.0, 35.0], 0.03);
    eval(&h2, &format!("m = {}", fit_call(&lua_rows(&rows), "")));
    eval(&h2, &format!("m:save({})", lua_str(&target)));
    assert!(std::fs::read_to_string(&target)
        .unwrap()
        .contains("meniscus-fitted-mixture"));
    std::fs::remove_dir_all(&outside).unwrap();
}

// ---- plots -------------------------------------------------------------------

#[cfg(feature = "plot")]
#[test]
fn plots_are_written_with_title_and_axis_labels() {
    let (h, _) = fitted_host();
    let d = scratch_dir("plots");
    let (pd, pe, pp) = (d.join("d.svg"), d.join("e.svg"), d.join("p.svg"));
    eval(
        &h,
        &format!(
            "plot.density(m, {}, {{title = 'Density check', temperatures = {{15, 35}}, width = 640, height = 480}})",
            lua_str(&pd)
        ),
    );
    eval(&h, &format!("plot.excess(m, {})", lua_str(&pe)));
    eval(
        &h,
        &format!("plot.pmv(m, {}, {{t = 25, band = true}})", lua_str(&pp)),
    );
    let svg = std::fs::read_to_string(&pd).unwrap();
    assert!(svg.starts_with("<svg"), "{}", &svg[..80.min(svg.len())]);
    assert!(svg.contains("Density check"));
    assert!(svg.contains("mass fraction of solvent A w"));
    assert!(svg.contains("density ρ / (kg/m³)"));
    assert!(svg.contains("width=\"640\""));
    assert!(svg.contains("data 15 °C") && svg.contains("model 35 °C"));
    assert!(
        !svg.contains("model 25 °C"),
        "only the temperatures asked for"
    );
    let svg = std::fs::read_to_string(&pe).unwrap();
    assert!(svg.contains("Excess molar volume"), "default title");
    assert!(svg.contains("mole fraction of solvent A x"));
    assert!(svg.contains("data 25 °C"), "the fit's rows by default");
    let svg = std::fs::read_to_string(&pp).unwrap();
    assert!(svg.contains("25 °C"));
    assert!(svg.contains("partial molar volume of water"));
    assert!(svg.contains("±2u band"));
    // Without the data points.
    eval(
        &h,
        &format!("plot.excess(m, {}, {{data = false}})", lua_str(&pe)),
    );
    assert!(!std::fs::read_to_string(&pe).unwrap().contains("data 25 °C"));
    // No temporary files left behind.
    let names: Vec<String> = std::fs::read_dir(&d)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(names.iter().all(|n| n.ends_with(".svg")), "{names:?}");
}

#[cfg(feature = "plot")]
#[test]
fn the_reference_model_plots_too_and_plot_options_are_checked() {
    let h = host();
    eval(&h, "r = mixture.ethanol_water()");
    let d = scratch_dir("refplots");
    let p = d.join("ref.svg");
    eval(&h, &format!("plot.density(r, {})", lua_str(&p)));
    let svg = std::fs::read_to_string(&p).unwrap();
    assert!(svg.contains("model 10 °C") && svg.contains("model 30 °C"));
    assert!(svg.contains("mass fraction of ethanol w"));
    eval(&h, &format!("plot.pmv(r, {})", lua_str(&p)));
    assert!(std::fs::read_to_string(&p).unwrap().contains("20 °C"));
    let q = lua_str(&p);
    fails_with(
        &h,
        &format!("plot.density(r, {q}, {{data = true}})"),
        &["not a fitted mixture"],
    );
    fails_with(
        &h,
        &format!("plot.pmv(r, {q}, {{band = true}})"),
        &["not a fitted mixture"],
    );
    fails_with(
        &h,
        &format!("plot.density(r, {q}, {{colour = 'red'}})"),
        &["unknown key 'colour'"],
    );
    fails_with(
        &h,
        &format!("plot.density(r, {q}, {{width = 10}})"),
        &["plot size"],
    );
    fails_with(
        &h,
        &format!("plot.density(r, {q}, {{temperatures = {{50}}}})"),
        &["50", "outside"],
    );
    fails_with(
        &h,
        &format!("plot.pmv(r, {q}, {{temperatures = {{10, 20}}}})"),
        &["one temperature"],
    );
    fails_with(
        &h,
        &format!("plot.density(42, {q})"),
        &["plot.density", "must be a mixture"],
    );
    fails_with(&h, "plot.density(r, 42)", &["path of the SVG file"]);
}

#[cfg(feature = "plot")]
#[test]
fn plot_registration_keeps_other_plot_functions() {
    let h = host();
    eval(&h, "plot.bars = function() return 'bars' end");
    meniscus::lua::plot::register(h.lua()).unwrap();
    assert_eq!(text(&h, "plot.bars()"), "bars");
    assert_eq!(text(&h, "type(plot.density)"), "function");
    assert!(h.help_text("plot").contains("plot.density"));
}

// ---- the demo script, end to end -------------------------------------------

#[cfg(all(feature = "cli", feature = "plot"))]
#[test]
fn the_solvent_demo_script_runs_end_to_end() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir_all(dir.path().join("demo-data")).unwrap();
    std::fs::create_dir_all(dir.path().join("out")).unwrap();
    std::fs::copy(
        root.join("demo-data/solvent_densities.csv"),
        dir.path().join("demo-data/solvent_densities.csv"),
    )
    .unwrap();
    let script = root.join("scripts/fit_solvent.lua");
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_meniscus"))
        .env("MENISCUS_HISTORY", "")
        .current_dir(dir.path())
        .arg("run")
        .arg(&script)
        .stdin(std::process::Stdio::null())
        .output()
        .unwrap();
    let out = String::from_utf8_lossy(&o.stdout);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(0), "stderr: {err}\nstdout: {out}");
    for part in [
        "Fit of 2-propanol–water",
        "chosen by AICc",
        "√(χ²/dof)",
        "fitted ± u beside the local tangent",
        "Fenwick Reach",
    ] {
        assert!(out.contains(part), "stdout lacks {part:?}:\n{out}");
    }
    let o_dir = dir.path().join("out");
    let report = std::fs::read_to_string(o_dir.join("solvent_report.txt")).unwrap();
    assert!(report.contains("Term selection") && report.contains("tangent"));
    let model = std::fs::read_to_string(o_dir.join("solvent_model.json")).unwrap();
    assert!(model.contains("solvent_densities.csv"));
    for (f, label) in [
        ("solvent_density.svg", "density ρ / (kg/m³)"),
        ("solvent_excess.svg", "excess molar volume"),
        ("solvent_pmv.svg", "partial molar volume of 2-propanol"),
    ] {
        let svg = std::fs::read_to_string(o_dir.join(f)).unwrap();
        assert!(svg.contains(label), "{f} lacks {label:?}");
    }
    // The saved model loads back and answers like the fitted one did.
    let h = Host::new(HostOptions {
        allow_paths: vec![dir.path().to_path_buf()],
        ..HostOptions::default()
    })
    .unwrap();
    let json = o_dir.join("solvent_model.json");
    let got = h
        .eval(
            &format!(
                "mixture.load({}):density{{abm = 70, t = 20}}",
                lua_str(&json)
            ),
            "=t",
        )
        .unwrap();
    let rho = got.iter().next().unwrap().as_f64().unwrap();
    assert!(out.contains(&format!("{rho:.2} ±")), "{rho} in {out}");
    // Without the output directory the script makes it (inside the
    // working directory) and writes everything there.
    std::fs::remove_dir_all(&o_dir).unwrap();
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_meniscus"))
        .env("MENISCUS_HISTORY", "")
        .current_dir(dir.path())
        .arg("run")
        .arg(&script)
        .stdin(std::process::Stdio::null())
        .output()
        .unwrap();
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    for f in [
        "solvent_report.txt",
        "solvent_model.json",
        "solvent_pmv.svg",
    ] {
        assert!(o_dir.join(f).is_file(), "{f} not written");
    }
}

#[test]
fn the_fit_rows_of_the_demo_file_convert_like_the_kernel() {
    // The demo CSV through mixture.fit gives the kernel fit of the same rows.
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let csv = std::fs::read_to_string(root.join("demo-data/solvent_densities.csv")).unwrap();
    let comps = [
        Component::new("2-propanol", 60.096),
        Component::new("water", 18.015),
    ];
    let mut rows: Vec<FitRow> = Vec::new();
    for line in csv.lines().skip(1) {
        let f: Vec<f64> = line
            .split(',')
            .skip(1)
            .map(|s| s.parse().unwrap())
            .collect();
        rows.push(
            FitRow::from_basis(RowBasis::Abm, f[0], f[2], f[1], &comps)
                .unwrap()
                .with_u_rho(f[3]),
        );
    }
    let want = fit(&FitSpec::new("2-propanol–water", comps), &rows).unwrap();
    let h = host();
    eval(
        &h,
        "m = mixture.fit{data = 'demo-data/solvent_densities.csv', basis = 'abm', \
         composition = 'ipa_pct_mass', density = 'density_kg_m3', t = 't_c', \
         u_density = 'u_density_kg_m3', components = {{name = '2-propanol', molar_mass = 60.096}, \
         {name = 'water', molar_mass = 18.015}}}",
    );
    assert_eq!(coefficients(&h, "m"), want.model.coefficients());
    assert_eq!(num(&h, "m:fit_info().rows"), 51.0);
}
