//! The report on a fit: coefficients with standard uncertainties, residual
//! statistics, studentized residuals and flagged outliers, the condition
//! number, the data range, the term-selection table and warnings; its
//! `Display` prints all of it for a person to read.
//!
//! Row numbers: the `row` fields are 0-based indices into the slice given
//! to [`fit`](super::fit); the printed report numbers rows from 1, as the
//! error messages do.

use std::fmt;

use super::model::{Estimate, PureOrigin};
use crate::kernel::model::{Component, Validity};

/// One excess coefficient a_kj (cm³/mol/K^j) with its standard uncertainty.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Coefficient {
    /// Redlich–Kister index k (term (2x−1)^k).
    pub k: usize,
    /// Temperature power j (factor (t − t₀)^j).
    pub j: usize,
    /// The value.
    pub value: f64,
    /// Its standard uncertainty.
    pub u: f64,
}

/// One candidate of the term selection.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct AiccEntry {
    /// Redlich–Kister terms n.
    pub terms: usize,
    /// Temperature order q.
    pub t_order: usize,
    /// Coefficients n(q+1).
    pub parameters: usize,
    /// Weighted residual sum of squares χ², when the candidate was solvable.
    pub rss: Option<f64>,
    /// AICc, when defined (enough rows, full rank).
    pub aicc: Option<f64>,
    /// Why a candidate was skipped; empty otherwise.
    pub note: String,
    /// The candidate the fit uses.
    pub chosen: bool,
}

/// The residual of one data row.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct RowResidual {
    /// Index of the row in the data (from 0).
    pub row: usize,
    /// Mass fraction of component 1.
    pub w: f64,
    /// Mole fraction of component 1.
    pub x: f64,
    /// Temperature, °C.
    pub t: f64,
    /// A pure-component row (w = 0 or 1).
    pub pure: bool,
    /// Measured minus fitted excess molar volume, cm³/mol (mixture rows).
    pub ve_residual: Option<f64>,
    /// Measured minus fitted density, kg/m³.
    pub rho_residual: f64,
    /// Leverage (diagonal of the hat matrix) in its own fit.
    pub leverage: f64,
    /// Externally studentized residual: the residual in density terms
    /// (the V^E residual times ρ/V_m, over u(ρ) when stated) divided by
    /// the residual standard deviation of the fit without that row and by
    /// √(1 − leverage), signed like the density residual; 0 when undefined
    /// (leverage 1, or fewer than two residual degrees of freedom).
    pub studentized: f64,
    /// The |studentized| above which this row is flagged:
    /// [`outlier_limit`](super::outlier_limit) of the residual degrees of
    /// freedom of its own fit (the excess fit, or its pure curve); infinite
    /// when nothing can be flagged (too few degrees of freedom, given
    /// curve).
    pub limit: f64,
    /// |studentized| > `limit`.
    pub outlier: bool,
}

/// The pure-component curve of one component.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct PureReport {
    /// Component name.
    pub component: String,
    /// Fitted or given.
    pub origin: PureOrigin,
    /// Pure rows in the data.
    pub rows: usize,
    /// Distinct temperatures among them.
    pub distinct_temperatures: usize,
    /// Centre temperature of the polynomial, °C.
    pub t0: f64,
    /// Coefficients c_m (kg/m³/K^m) with standard uncertainties (0 when
    /// given or unknown).
    pub coefficients: Vec<Estimate>,
    /// Residual standard deviation of the pure rows, kg/m³ (fitted curves
    /// with residual degrees of freedom).
    pub residual_sd: Option<f64>,
    /// Temperature span of the pure rows, °C.
    pub t_span: Option<(f64, f64)>,
}

/// Everything known about how a fit went.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct FitReport {
    /// Mixture name.
    pub name: String,
    /// The components.
    pub components: [Component; 2],
    /// Rows given.
    pub rows: usize,
    /// Rows with 0 < w < 1 (those the excess fit uses).
    pub mixture_rows: usize,
    /// Whether rows carried density uncertainties (weighted by them);
    /// otherwise every row was assumed to have the same, unknown density
    /// uncertainty (see the module doc of [`crate::kernel::fit`](mod@crate::kernel::fit)).
    pub weighted: bool,
    /// Redlich–Kister terms used.
    pub terms: usize,
    /// Temperature order used.
    pub t_order: usize,
    /// Terms chosen by AICc (else fixed by the caller).
    pub terms_auto: bool,
    /// Order chosen by AICc (else fixed by the caller).
    pub order_auto: bool,
    /// Centre t₀ of the temperature polynomials, °C.
    pub t_center: f64,
    /// a_kj with standard uncertainties, k-major.
    pub coefficients: Vec<Coefficient>,
    /// The two pure-component curves.
    pub pure: [PureReport; 2],
    /// Residual degrees of freedom of the excess fit, N − p.
    pub dof: usize,
    /// Residual standard deviation of V^E, √(Σe²/(N−p)), cm³/mol.
    pub residual_sd_ve: f64,
    /// Residual standard deviation of the mixture densities, √(Σe²/(N−p)),
    /// kg/m³.
    pub residual_sd_rho: f64,
    /// For weighted fits, √(χ²/(N−p)): near 1 when the stated density
    /// uncertainties account for the scatter, above 1 when they understate
    /// it. The covariance is scaled by its square either way.
    pub birge_ratio: Option<f64>,
    /// Row (index from 0) with the largest |density residual|.
    pub largest_residual: usize,
    /// Residuals of every row, in data order.
    pub residuals: Vec<RowResidual>,
    /// Rows (indices from 0) flagged as outliers.
    pub outliers: Vec<usize>,
    /// Condition number of the column-scaled weighted design matrix of
    /// the chosen model (1 = orthogonal terms; above ~1e8 the coefficients
    /// are poorly determined individually even if the curve is fine).
    pub condition_number: f64,
    /// Composition and temperature span of the data.
    pub data_range: Validity,
    /// Every candidate tried.
    pub aicc_table: Vec<AiccEntry>,
    /// Things the caller should know (extrapolated pure curves, …).
    pub warnings: Vec<String>,
}

fn order_name(q: usize) -> &'static str {
    match q {
        0 => "constant",
        1 => "linear",
        _ => "quadratic",
    }
}

/// `v` rounded to `digits` significant digits: plain notation for
/// 10⁻³ ≤ |v| < 10⁶, else scientific (`1.23457e-5`); trailing zeros kept
/// (they are digits of the value).
pub(crate) fn sig(v: f64, digits: usize) -> String {
    let digits = digits.max(1);
    if v == 0.0 {
        return "0".into();
    }
    if !v.is_finite() {
        return format!("{v}");
    }
    // The exponent after rounding (9.9999996 rounds to 1.00000e1).
    let sci = format!("{:.*e}", digits - 1, v);
    let exp: i32 = sci
        .rsplit_once('e')
        .and_then(|(_, e)| e.parse().ok())
        .unwrap_or(0);
    if (-3..6).contains(&exp) {
        let decimals = (digits as i32 - 1 - exp).max(0) as usize;
        format!("{v:.decimals$}")
    } else {
        sci
    }
}

/// Like [`sig`] with trailing zeros (and a bare decimal point) dropped:
/// for compositions and temperatures, which were given as read.
pub(crate) fn sig_trim(v: f64, digits: usize) -> String {
    let s = sig(v, digits);
    let (mant, exp) = match s.split_once('e') {
        Some((m, e)) => (m.to_string(), format!("e{e}")),
        None => (s.clone(), String::new()),
    };
    let mant = if mant.contains('.') {
        mant.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        mant
    };
    format!("{mant}{exp}")
}

/// A composition or temperature as printed: 6 significant digits,
/// trailing zeros dropped (w = 0.6998, t = 15).
pub(crate) fn num(v: f64) -> String {
    sig_trim(v, 6)
}

/// A fitted coefficient with its standard uncertainty: the value to 6
/// significant digits (coefficients are correlated, so they are not cut
/// to their uncertainty) and the uncertainty to 2.
fn coef(value: f64, u: f64) -> (String, String) {
    (sig(value, 6), sig(u, 2))
}

impl fmt::Display for FitReport {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let [c1, c2] = &self.components;
        writeln!(f, "Fit of {} ({} + {})", self.name, c1.name, c2.name)?;
        writeln!(
            f,
            "  data: {} rows ({} mixture, {} pure {}, {} pure {})",
            self.rows, self.mixture_rows, self.pure[0].rows, c1.name, self.pure[1].rows, c2.name,
        )?;
        if self.weighted {
            writeln!(f, "  weights: weighted by the stated density uncertainties")?;
        } else {
            writeln!(
                f,
                "  weights: no density uncertainties given, so every density is assumed \
                 equally uncertain:\n    rows weighted by (ρ/V_m)², a least-squares fit in \
                 density; residual scale and studentized residuals in density terms"
            )?;
        }
        let d = self.data_range;
        writeln!(
            f,
            "  valid range: w {} to {}, t {} to {} °C",
            num(d.w_min),
            num(d.w_max),
            num(d.t_min),
            num(d.t_max)
        )?;
        writeln!(f)?;
        writeln!(
            f,
            "Pure-component densities ρ*(t) = Σ c_m (t − t₀)^m, kg/m³"
        )?;
        for p in &self.pure {
            let origin = match p.origin {
                PureOrigin::Fitted => "fitted",
                PureOrigin::Given => "given",
            };
            write!(f, "  {} ({origin}, t₀ = {} °C):", p.component, num(p.t0))?;
            for (m, c) in p.coefficients.iter().enumerate() {
                let (v, u) = coef(c.value, c.u);
                if c.u > 0.0 {
                    write!(f, "  c{m} = {v} ± {u}")?;
                } else {
                    write!(f, "  c{m} = {v}")?;
                }
            }
            writeln!(f)?;
            if let Some(sd) = p.residual_sd {
                writeln!(
                    f,
                    "    {} rows at {} temperatures, residual sd {:.3} kg/m³",
                    p.rows, p.distinct_temperatures, sd
                )?;
            }
        }
        writeln!(f)?;
        writeln!(
            f,
            "Excess molar volume V^E = x(1−x) Σ A_k(t) (2x−1)^k, cm³/mol, A_k(t) = Σ a_kj (t − {} °C)^j",
            num(self.t_center)
        )?;
        writeln!(
            f,
            "  {} terms ({}), temperature order {} — {} ({})",
            self.terms,
            if self.terms_auto {
                "chosen by AICc"
            } else {
                "fixed"
            },
            self.t_order,
            order_name(self.t_order),
            if self.order_auto {
                "chosen by AICc"
            } else {
                "fixed"
            },
        )?;
        writeln!(
            f,
            "  {:>3} {:>3} {:>14} {:>10}   (cm³/mol/K^j)",
            "k", "j", "a_kj", "u(a_kj)"
        )?;
        for c in &self.coefficients {
            let (v, u) = coef(c.value, c.u);
            writeln!(f, "  {:>3} {:>3} {:>14} {:>10}", c.k, c.j, v, u)?;
        }
        writeln!(f)?;
        writeln!(f, "Residuals ({} degrees of freedom)", self.dof)?;
        writeln!(f, "  sd of V^E:      {:.4} cm³/mol", self.residual_sd_ve)?;
        writeln!(f, "  sd of density:  {:.3} kg/m³", self.residual_sd_rho)?;
        if let Some(b) = self.birge_ratio {
            writeln!(
                f,
                "  √(χ²/dof):      {b:.3} (1 when the stated uncertainties explain the scatter)"
            )?;
        }
        if let Some(r) = self.residuals.get(self.largest_residual) {
            writeln!(
                f,
                "  largest:        row {} (w = {}, t = {} °C): {:+.3} kg/m³",
                r.row + 1,
                num(r.w),
                num(r.t),
                r.rho_residual
            )?;
        }
        writeln!(
            f,
            "  condition number of the design: {:.2e}",
            self.condition_number
        )?;
        let rule = format!(
            "|studentized residual| above {:.2} for mixture rows, the Student-t value \
             as rare as {}σ under normal errors",
            super::outlier_limit(self.dof),
            super::OUTLIER_LIMIT
        );
        if self.outliers.is_empty() {
            writeln!(f, "  no outliers ({rule})")?;
        } else {
            writeln!(f, "  outliers ({rule}):")?;
            for &i in &self.outliers {
                let r = &self.residuals[i];
                writeln!(
                    f,
                    "    row {}: w = {}, t = {} °C, residual {:+.3} kg/m³, studentized {:+.2} (limit {:.2})",
                    i + 1,
                    num(r.w),
                    num(r.t),
                    r.rho_residual,
                    r.studentized,
                    r.limit
                )?;
            }
        }
        writeln!(f)?;
        writeln!(f, "Term selection (AICc; smallest wins)")?;
        writeln!(
            f,
            "  {:>5} {:>5} {:>6} {:>12} {:>10}",
            "terms", "order", "coefs", "χ²", "AICc"
        )?;
        for e in &self.aicc_table {
            let rss = e.rss.map_or("-".to_string(), |v| sig(v, 5));
            let aicc = e.aicc.map_or("-".to_string(), |v| format!("{v:.2}"));
            let line = format!(
                "  {:>5} {:>5} {:>6} {:>12} {:>10} {}{}",
                e.terms,
                e.t_order,
                e.parameters,
                rss,
                aicc,
                if e.chosen { "← chosen" } else { "" },
                if e.note.is_empty() {
                    String::new()
                } else {
                    format!(" ({})", e.note)
                }
            );
            writeln!(f, "{}", line.trim_end())?;
        }
        if !self.warnings.is_empty() {
            writeln!(f)?;
            writeln!(f, "Warnings")?;
            for w in &self.warnings {
                writeln!(f, "  - {w}")?;
            }
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_print_with_sensible_digits() {
        assert_eq!(num(69.98 / 100.0), "0.6998");
        assert_eq!(num(0.6998000000000001), "0.6998");
        assert_eq!(num(1.0), "1");
        assert_eq!(num(0.0), "0");
        assert_eq!(num(15.0), "15");
        assert_eq!(num(24.987654321), "24.9877");
        assert_eq!(num(1.0 / 24.0), "0.0416667");
        assert_eq!(num(1e-4), "1e-4");
        assert_eq!(sig(781.0800000001, 6), "781.080");
        assert_eq!(sig(-3.421130183, 6), "-3.42113");
        assert_eq!(sig(-0.000875, 6), "-8.75000e-4");
        assert_eq!(sig(0.00845172, 6), "0.00845172");
        assert_eq!(sig(4.5e-6, 6), "4.50000e-6");
        assert_eq!(sig(9.9999996, 6), "10.0000");
        assert_eq!(sig(325_870.4, 5), "325870");
        assert_eq!(sig(2.5e7, 2), "2.5e7");
        assert_eq!(sig(0.0123456, 2), "0.012");
    }
}
