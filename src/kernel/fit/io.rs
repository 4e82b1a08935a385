//! Saving and loading fitted models as versioned JSON. Writing goes to a
//! `String` and reading from a `&str`; files are the caller's business.
//!
//! The raw records below mirror the file exactly (`deny_unknown_fields`,
//! units in the field names); loading parses them, checks the format name
//! and version first, then every field, and only then builds the
//! [`FittedMixture`], so a damaged or hand-edited file gives one clear
//! error instead of a model that misbehaves later.

use serde::{Deserialize, Serialize};

use super::model::{Excess, FittedMixture, Provenance, PureCurve, PureOrigin};
use super::{check_component, FitRow, PureDensity, MAX_TERMS, MAX_T_ORDER};
use crate::kernel::error::{Error, Result};
use crate::kernel::model::{Component, Mixture, Validity};

/// Version of the saved-model format this build writes and reads.
pub const FORMAT_VERSION: u32 = 1;
const FORMAT_NAME: &str = "meniscus-fitted-mixture";

#[derive(Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFile {
    format: String,
    version: u32,
    name: String,
    components: Vec<RawComponent>,
    pure_densities: Vec<RawPure>,
    excess: RawExcess,
    data_range: RawRange,
    provenance: RawProvenance,
}

#[derive(Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawComponent {
    name: String,
    /// g/mol.
    molar_mass_g_mol: f64,
}

#[derive(Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPure {
    /// "fitted" or "given".
    origin: String,
    /// Centre of the polynomial, °C.
    t0_c: f64,
    /// kg/m³/K^m.
    coefficients: Vec<f64>,
    covariance: Option<Vec<Vec<f64>>>,
}

#[derive(Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawExcess {
    /// Centre of the temperature polynomials, °C.
    t0_c: f64,
    terms: usize,
    t_order: usize,
    /// Rows k, columns j; cm³/mol/K^j.
    coefficients: Vec<Vec<f64>>,
    /// Order a_00, a_01, …, a_10, …
    covariance: Vec<Vec<f64>>,
}

#[derive(Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRange {
    w_min: f64,
    w_max: f64,
    t_min_c: f64,
    t_max_c: f64,
}

#[derive(Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawProvenance {
    source: String,
    date: String,
    row_count: usize,
    rows: Vec<RawRow>,
}

#[derive(Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct RawRow {
    w: f64,
    rho_kg_m3: f64,
    t_c: f64,
    #[serde(default)]
    u_rho_kg_m3: Option<f64>,
}

fn bad(msg: String) -> Error {
    Error::SavedModel(msg)
}

fn square(what: &str, m: &[Vec<f64>], n: usize) -> Result<Vec<f64>> {
    if m.len() != n || m.iter().any(|r| r.len() != n) {
        return Err(bad(format!("{what} must be a {n} × {n} matrix")));
    }
    let flat: Vec<f64> = m.iter().flatten().copied().collect();
    if flat.iter().any(|v| !v.is_finite()) {
        return Err(bad(format!("{what} has a non-finite entry")));
    }
    for i in 0..n {
        if flat[i * n + i] < 0.0 {
            return Err(bad(format!(
                "{what} has a negative variance {} on its diagonal (entry {i})",
                flat[i * n + i]
            )));
        }
        for j in 0..i {
            let (a, b) = (flat[i * n + j], flat[j * n + i]);
            if (a - b).abs() > 1e-9 * a.abs().max(b.abs()).max(f64::MIN_POSITIVE) {
                return Err(bad(format!(
                    "{what} is not symmetric at ({i}, {j}): {a} vs {b}"
                )));
            }
        }
    }
    Ok(flat)
}

fn to_rows(flat: &[f64], n: usize) -> Vec<Vec<f64>> {
    flat.chunks(n.max(1)).map(|c| c.to_vec()).collect()
}

impl FittedMixture {
    /// The model as pretty-printed JSON (format version
    /// [`FORMAT_VERSION`]): components, coefficients and covariance, pure
    /// curves, data range and provenance with every data row.
    pub fn to_json(&self) -> Result<String> {
        let pure = self.pure.iter().map(|p| RawPure {
            origin: match p.origin {
                PureOrigin::Fitted => "fitted",
                PureOrigin::Given => "given",
            }
            .into(),
            t0_c: p.density.t0,
            coefficients: p.density.coefficients.clone(),
            covariance: p
                .cov
                .as_ref()
                .map(|c| to_rows(c, p.density.coefficients.len())),
        });
        let raw = RawFile {
            format: FORMAT_NAME.into(),
            version: FORMAT_VERSION,
            name: self.name.clone(),
            components: self
                .components
                .iter()
                .map(|c| RawComponent {
                    name: c.name.clone(),
                    molar_mass_g_mol: c.molar_mass,
                })
                .collect(),
            pure_densities: pure.collect(),
            excess: RawExcess {
                t0_c: self.excess.t0,
                terms: self.excess.terms,
                t_order: self.excess.t_order,
                coefficients: to_rows(&self.excess.coef, self.excess.t_order + 1),
                covariance: to_rows(&self.excess.cov, self.excess.coef.len()),
            },
            data_range: RawRange {
                w_min: self.data_range.w_min,
                w_max: self.data_range.w_max,
                t_min_c: self.data_range.t_min,
                t_max_c: self.data_range.t_max,
            },
            provenance: RawProvenance {
                source: self.provenance.source.clone(),
                date: self.provenance.date.clone(),
                row_count: self.provenance.rows.len(),
                rows: self
                    .provenance
                    .rows
                    .iter()
                    .map(|r| RawRow {
                        w: r.w,
                        rho_kg_m3: r.rho,
                        t_c: r.t,
                        u_rho_kg_m3: r.u_rho,
                    })
                    .collect(),
            },
        };
        serde_json::to_string_pretty(&raw).map_err(|e| bad(format!("cannot write: {e}")))
    }

    /// Reads a model written by [`FittedMixture::to_json`], checking the
    /// format name, the version and every field.
    pub fn from_json(text: &str) -> Result<FittedMixture> {
        let value: serde_json::Value =
            serde_json::from_str(text).map_err(|e| bad(format!("not valid JSON: {e}")))?;
        match value.get("format").and_then(|f| f.as_str()) {
            Some(FORMAT_NAME) => {}
            Some(other) => {
                return Err(bad(format!(
                    "format is \"{other}\", expected \"{FORMAT_NAME}\""
                )))
            }
            None => return Err(bad(format!("no \"format\": \"{FORMAT_NAME}\" field"))),
        }
        match value.get("version").and_then(|v| v.as_u64()) {
            Some(v) if v == FORMAT_VERSION as u64 => {}
            Some(v) => {
                return Err(bad(format!(
                    "version {v} is not supported; this build reads version {FORMAT_VERSION}"
                )))
            }
            None => return Err(bad("no numeric \"version\" field".into())),
        }
        let raw: RawFile = serde_json::from_value(value).map_err(|e| bad(e.to_string()))?;
        build(raw)
    }
}

fn build(raw: RawFile) -> Result<FittedMixture> {
    if raw.name.trim().is_empty() {
        return Err(bad("the mixture needs a name".into()));
    }
    let [c1, c2]: [RawComponent; 2] = raw
        .components
        .try_into()
        .map_err(|v: Vec<RawComponent>| bad(format!("needs 2 components, has {}", v.len())))?;
    let components = [
        Component::new(c1.name, c1.molar_mass_g_mol),
        Component::new(c2.name, c2.molar_mass_g_mol),
    ];
    for c in &components {
        check_component(c).map_err(|e| bad(e.to_string()))?;
    }
    let [p1, p2]: [RawPure; 2] = raw
        .pure_densities
        .try_into()
        .map_err(|v: Vec<RawPure>| bad(format!("needs 2 pure densities, has {}", v.len())))?;
    let mut pure = Vec::new();
    for (i, p) in [p1, p2].into_iter().enumerate() {
        let what = format!("pure density of {}", components[i].name);
        let origin = match p.origin.as_str() {
            "fitted" => PureOrigin::Fitted,
            "given" => PureOrigin::Given,
            o => {
                return Err(bad(format!(
                    "{what}: origin is \"{o}\", expected \"fitted\" or \"given\""
                )))
            }
        };
        let density = PureDensity::polynomial(p.t0_c, p.coefficients);
        density.check(&what).map_err(|e| bad(e.to_string()))?;
        let n = density.coefficients.len();
        let cov = match p.covariance {
            Some(c) => Some(square(&format!("{what}: covariance"), &c, n)?),
            None => None,
        };
        pure.push(PureCurve {
            density,
            cov,
            origin,
        });
    }
    let e = raw.excess;
    if e.terms == 0 || e.terms > MAX_TERMS {
        return Err(bad(format!(
            "excess: terms must be 1 to {MAX_TERMS}, got {}",
            e.terms
        )));
    }
    if e.t_order > MAX_T_ORDER {
        return Err(bad(format!(
            "excess: t_order must be 0 to {MAX_T_ORDER}, got {}",
            e.t_order
        )));
    }
    if !e.t0_c.is_finite() {
        return Err(bad("excess: t0_c must be a finite number".into()));
    }
    let q1 = e.t_order + 1;
    if e.coefficients.len() != e.terms || e.coefficients.iter().any(|r| r.len() != q1) {
        return Err(bad(format!(
            "excess: coefficients must be {} rows of {q1} numbers",
            e.terms
        )));
    }
    let coef: Vec<f64> = e.coefficients.into_iter().flatten().collect();
    if coef.iter().any(|c| !c.is_finite()) {
        return Err(bad("excess: coefficients must be finite numbers".into()));
    }
    let cov = square("excess: covariance", &e.covariance, coef.len())?;
    let r = raw.data_range;
    let range = Validity {
        w_min: r.w_min,
        w_max: r.w_max,
        t_min: r.t_min_c,
        t_max: r.t_max_c,
    };
    let finite = [r.w_min, r.w_max, r.t_min_c, r.t_max_c]
        .iter()
        .all(|v| v.is_finite());
    if !finite || r.w_min < 0.0 || r.w_max > 1.0 || r.w_min > r.w_max || r.t_min_c > r.t_max_c {
        return Err(bad(format!(
            "data_range must be finite with 0 <= w_min <= w_max <= 1 and t_min_c <= t_max_c, \
             got w {}..{} and t {}..{} °C",
            r.w_min, r.w_max, r.t_min_c, r.t_max_c
        )));
    }
    let p = raw.provenance;
    if p.row_count != p.rows.len() {
        return Err(bad(format!(
            "provenance: row_count is {} but {} rows are listed",
            p.row_count,
            p.rows.len()
        )));
    }
    let mut rows = Vec::with_capacity(p.rows.len());
    for (i, r) in p.rows.into_iter().enumerate() {
        let ok = r.w.is_finite()
            && (0.0..=1.0).contains(&r.w)
            && r.rho_kg_m3.is_finite()
            && r.rho_kg_m3 > 0.0
            && r.t_c.is_finite()
            && r.u_rho_kg_m3.map_or(true, |u| u.is_finite() && u > 0.0);
        if !ok {
            return Err(bad(format!(
                "provenance row {}: needs 0 <= w <= 1, a positive density, a finite temperature \
                 and a positive uncertainty if any",
                i + 1
            )));
        }
        rows.push(FitRow {
            w: r.w,
            rho: r.rho_kg_m3,
            t: r.t_c,
            u_rho: r.u_rho_kg_m3,
        });
    }
    let model = FittedMixture {
        name: raw.name,
        components,
        pure: [pure[0].clone(), pure[1].clone()],
        excess: Excess {
            t0: e.t0_c,
            terms: e.terms,
            t_order: e.t_order,
            coef,
            cov,
        },
        data_range: range,
        validity: range,
        provenance: Provenance {
            source: p.source,
            date: p.date,
            rows,
        },
    };
    // A last sanity check: the model must give a positive finite density
    // across its own range.
    for i in 0..=10 {
        let w = range.w_min + (range.w_max - range.w_min) * i as f64 / 10.0;
        for t in [range.t_min, 0.5 * (range.t_min + range.t_max), range.t_max] {
            let rho = model.rho(w, t);
            if !(rho.is_finite() && rho > 0.0) {
                return Err(bad(format!(
                    "the stored model gives density {rho} at w = {w}, t = {t} °C"
                )));
            }
        }
    }
    Ok(model)
}
