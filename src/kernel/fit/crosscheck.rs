//! A model-free cross-check of partial molar volumes: the tangent-intercept
//! method on the measured molar volumes at one temperature, smoothed
//! locally. Around each requested x the nearest `window` rows (by |x − x₀|)
//! get a quadratic V_m ≈ a + b u + c u² in u = (x − x₀)/h (h the window's
//! half-width); the tangent at x₀ meets x = 1 and x = 0 at
//! V̄₁ = a + (1 − x₀) b/h and V̄₂ = a − x₀ b/h.
//!
//! The local quadratic knows nothing of Redlich–Kister, so agreement with
//! the fitted model within a few of its uncertainties says the model's
//! shape is supported by the data there; disagreement near the ends or
//! where V_m curves sharply says the window is too wide or the model too
//! stiff, and is worth a plot.

use std::fmt;

use nalgebra::{DMatrix, DVector};

use super::lsq;
use super::model::{Estimate, FittedMixture};
use super::{check_component, FitRow};
use crate::kernel::composition::{w_from_x, x_from_w};
use crate::kernel::error::{Error, Result};
use crate::kernel::model::Component;

/// Partial molar volumes from the local tangent at one mole fraction.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct TangentPmv {
    /// Mole fraction x₀ of component 1.
    pub x: f64,
    /// V̄₁, cm³/mol.
    pub v1: f64,
    /// V̄₂, cm³/mol.
    pub v2: f64,
    /// Rows in the local regression.
    pub points: usize,
    /// Lowest x among them.
    pub x_min: f64,
    /// Highest x among them.
    pub x_max: f64,
}

/// Tangent-intercept partial molar volumes at each mole fraction of `xs`,
/// from the rows within `t_tol` °C of `t`, each over its `window` nearest
/// rows (at least 3; widened until the window holds 3 distinct
/// compositions). Pure rows take part as the end points of V_m(x).
pub fn tangent_intercept(
    rows: &[FitRow],
    components: &[Component; 2],
    t: f64,
    t_tol: f64,
    xs: &[f64],
    window: usize,
) -> Result<Vec<TangentPmv>> {
    check_component(&components[0])?;
    check_component(&components[1])?;
    if !t.is_finite() {
        return Err(Error::NotFinite {
            quantity: "temperature t",
            value: t,
        });
    }
    if !(t_tol.is_finite() && t_tol >= 0.0) {
        return Err(Error::Invalid(format!(
            "temperature tolerance must be a non-negative number of K, got {t_tol}"
        )));
    }
    if window < 3 {
        return Err(Error::Invalid(format!(
            "the tangent window needs at least 3 rows for a local quadratic, got {window}"
        )));
    }
    let (m1, m2) = (components[0].molar_mass, components[1].molar_mass);
    let mut pts: Vec<(f64, f64)> = Vec::new();
    for (i, r) in rows.iter().enumerate() {
        if !(r.w.is_finite() && r.rho.is_finite() && r.t.is_finite()) {
            return Err(Error::FitRow {
                row: i + 1,
                message: format!(
                    "w, density and temperature must be finite numbers, got {}, {}, {}",
                    r.w, r.rho, r.t
                ),
            });
        }
        if (r.t - t).abs() > t_tol {
            continue;
        }
        if !(0.0..=1.0).contains(&r.w) || r.rho <= 0.0 {
            return Err(Error::FitRow {
                row: i + 1,
                message: format!(
                    "needs 0 <= w <= 1 and a positive density, got w = {} and {} kg/m³",
                    r.w, r.rho
                ),
            });
        }
        let mbar = 1.0 / (r.w / m1 + (1.0 - r.w) / m2);
        pts.push((x_from_w(r.w, m1, m2), 1000.0 * mbar / r.rho));
    }
    let distinct =
        super::engine::count_distinct(&pts.iter().map(|p| p.0).collect::<Vec<_>>(), 1e-9);
    if distinct < 3 {
        return Err(Error::Fit(format!(
            "the tangent cross-check needs rows at 3 or more compositions within {t_tol} K of \
             {t} °C, found {distinct}"
        )));
    }
    xs.iter()
        .map(|&x0| {
            if !(x0.is_finite() && (0.0..=1.0).contains(&x0)) {
                return Err(Error::OutOfRange {
                    quantity: "mole fraction x",
                    value: x0,
                    min: 0.0,
                    max: 1.0,
                    unit: "",
                });
            }
            local_tangent(&pts, x0, window)
        })
        .collect()
}

fn local_tangent(pts: &[(f64, f64)], x0: f64, window: usize) -> Result<TangentPmv> {
    let mut order: Vec<usize> = (0..pts.len()).collect();
    order.sort_by(|&a, &b| {
        (pts[a].0 - x0)
            .abs()
            .total_cmp(&(pts[b].0 - x0).abs())
            .then(pts[a].0.total_cmp(&pts[b].0))
    });
    let mut take = window.min(pts.len());
    loop {
        let xs: Vec<f64> = order[..take].iter().map(|&i| pts[i].0).collect();
        if super::engine::count_distinct(&xs, 1e-9) >= 3 || take == pts.len() {
            break;
        }
        take += 1;
    }
    let sel = &order[..take];
    let h = sel
        .iter()
        .map(|&i| (pts[i].0 - x0).abs())
        .fold(0.0, f64::max)
        .max(1e-12);
    let mut a = DMatrix::zeros(take, 3);
    let mut y = DVector::zeros(take);
    for (r, &i) in sel.iter().enumerate() {
        let u = (pts[i].0 - x0) / h;
        a[(r, 0)] = 1.0;
        a[(r, 1)] = u;
        a[(r, 2)] = u * u;
        y[r] = pts[i].1;
    }
    let sol = lsq::solve_dense(a, &y).map_err(|cond| {
        Error::Fit(format!(
            "the local quadratic at x = {x0} is singular (condition number {cond:.2e})"
        ))
    })?;
    let vm = sol.coef[0];
    let slope = sol.coef[1] / h;
    let (lo, hi) = sel
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, u), &i| {
            (l.min(pts[i].0), u.max(pts[i].0))
        });
    Ok(TangentPmv {
        x: x0,
        v1: vm + (1.0 - x0) * slope,
        v2: vm - x0 * slope,
        points: take,
        x_min: lo,
        x_max: hi,
    })
}

/// The fitted partial molar volumes beside the model-free ones at one x.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct PmvComparison {
    /// Mole fraction of component 1.
    pub x: f64,
    /// Fitted (V̄₁, V̄₂) with standard uncertainties, cm³/mol.
    pub fitted: [Estimate; 2],
    /// Tangent-intercept values.
    pub local: TangentPmv,
    /// local − fitted, cm³/mol.
    pub difference: [f64; 2],
}

/// A table of [`PmvComparison`]s at one temperature.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct CrossCheck {
    /// Temperature, °C.
    pub t: f64,
    /// Component names.
    pub components: [String; 2],
    /// One line per requested x.
    pub rows: Vec<PmvComparison>,
}

impl FittedMixture {
    /// Fitted partial molar volumes beside tangent-intercept values from
    /// the model's own data rows within `t_tol` °C of `t` (see
    /// [`tangent_intercept`]), at mole fractions `xs`.
    pub fn cross_check(&self, t: f64, t_tol: f64, xs: &[f64], window: usize) -> Result<CrossCheck> {
        let local = tangent_intercept(
            &self.provenance.rows,
            &self.components,
            t,
            t_tol,
            xs,
            window,
        )?;
        let (m1, m2) = (self.components[0].molar_mass, self.components[1].molar_mass);
        let rows = local
            .into_iter()
            .map(|l| {
                let fitted = self.partial_molar_volumes_u(w_from_x(l.x, m1, m2), t)?;
                Ok(PmvComparison {
                    x: l.x,
                    fitted,
                    local: l,
                    difference: [l.v1 - fitted[0].value, l.v2 - fitted[1].value],
                })
            })
            .collect::<Result<Vec<_>>>()?;
        Ok(CrossCheck {
            t,
            components: [
                self.components[0].name.clone(),
                self.components[1].name.clone(),
            ],
            rows,
        })
    }
}

impl fmt::Display for CrossCheck {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let [a, b] = &self.components;
        writeln!(
            f,
            "Partial molar volumes at {} °C, cm³/mol: fitted ± u beside the local tangent",
            self.t
        )?;
        writeln!(
            f,
            "  {:>7} {:>22} {:>10} {:>22} {:>10} {:>6}",
            "x",
            format!("V̄ {a} fitted"),
            "tangent",
            format!("V̄ {b} fitted"),
            "tangent",
            "rows"
        )?;
        for r in &self.rows {
            writeln!(
                f,
                "  {:>7.4} {:>13.4} ± {:<6.4} {:>10.4} {:>13.4} ± {:<6.4} {:>10.4} {:>6}",
                r.x,
                r.fitted[0].value,
                r.fitted[0].u,
                r.local.v1,
                r.fitted[1].value,
                r.fitted[1].u,
                r.local.v2,
                r.local.points
            )?;
        }
        Ok(())
    }
}
