//! Binary mixtures fitted from measured densities.
//!
//! Rows of (mass fraction w of component 1, density ρ in kg/m³,
//! temperature t in °C, optional standard uncertainty of ρ) become a
//! [`FittedMixture`], a [`Mixture`](super::Mixture) like the reference
//! equation, plus a [`FitReport`] saying how well the data were described.
//!
//! The model, in molar volumes (cm³/mol), with x the mole fraction of
//! component 1 and τ = t − t₀:
//!
//! V_m(x, t) = x V₁*(t) + (1−x) V₂*(t) + V^E(x, t),
//! V^E = x(1−x) Σ_{k<n} A_k(t) (2x−1)^k  (Redlich–Kister),
//! A_k(t) = Σ_{j≤q} a_kj τ^j  (q = 0, 1 or 2),
//! V_i*(t) = 1000 M_i / ρ_i*(t),  ρ_i*(t) = Σ c_m (t − t_i)^m.
//!
//! The pure-component curves ρ_i* come first, from the data's pure rows
//! (degree ≤ 2, limited by the number of distinct temperatures) or from the
//! caller. Each mixture row then gives an excess molar volume
//! V^E_row = 1000 M̄/ρ − x V₁*(t) − (1−x) V₂*(t), and the a_kj are fitted to
//! those by weighted linear least squares (Householder QR, then SVD; see
//! `lsq`). The term count n and temperature order q are chosen by the
//! corrected Akaike criterion unless the caller fixes them:
//!
//! AICc = N ln(χ²/N) + 2K + 2K(K+1)/(N − K − 1),  K = n(q+1) + 1,
//!
//! N the number of mixture rows and χ² the weighted residual sum of
//! squares (K counts the coefficients plus the residual variance). The
//! candidate with the smallest AICc wins; candidates with N ≤ K + 1 or a
//! rank-deficient design are skipped; χ² below (64 ε)² ‖y‖² is raised to
//! that floor, so exact fits tie and the smaller model wins; on equal AICc
//! the candidate listed first (fewer coefficients, then lower order) wins.
//!
//! Weights: the density is what is measured, and a density error δρ
//! moves a row's excess volume by (∂V^E/∂ρ) δρ = −(V_m/ρ) δρ, which is
//! about five times larger at the low-density, high-molar-volume end of a
//! water–alcohol range than at the water end. Each row's V^E therefore
//! has u(V^E) = V_m u(ρ)/ρ and weight 1/u(V^E)² = (ρ/(V_m u(ρ)))².
//! With density uncertainties u(ρ) on the rows those are used. Without,
//! every row is assumed to have the same, unknown u(ρ): the weights are
//! (ρ/V_m)², so the fit is in effect a least-squares fit in density (to
//! first order), gives the same coefficients as a fit with any constant
//! stated u(ρ), and its residual scale σ and studentized residuals are in
//! density terms (σ estimates the density scatter in kg/m³). Either way
//! the covariance of the coefficients is σ²(JᵀWJ)⁻¹ with σ² = χ²/(N − p)
//! (p = n(q+1)), so it reflects the scatter actually seen. Pure-component
//! curves are fitted in density directly, weighted by 1/u(ρ)² or equally.

mod crosscheck;
mod engine;
mod io;
mod lsq;
mod model;
mod report;
mod stats;

pub use crosscheck::{
    tangent_intercept, CrossCheck, PmvComparison, TangentPmv, TangentWindow, ADAPTIVE_GAMMA,
    ADAPTIVE_WINDOWS,
};
pub use engine::fit;
pub use io::FORMAT_VERSION;
pub use model::{Estimate, FittedMixture, Isotherm, Provenance, PureOrigin};
pub use report::{AiccEntry, Coefficient, FitReport, PureReport, RowResidual};

use super::composition::w_from_x;
use super::error::{Error, Result};
use super::model::Component;

/// Most Redlich–Kister terms a fit may use (fixed or automatic).
pub const MAX_TERMS: usize = 16;
/// Default upper limit of the automatic term search.
pub const DEFAULT_MAX_TERMS: usize = 12;
/// Highest temperature order of the coefficients A_k(t).
pub const MAX_T_ORDER: usize = 2;
/// Highest degree of a fitted pure-component density curve.
pub const MAX_PURE_DEGREE: usize = 2;
/// Most coefficients a given pure-density polynomial may have.
pub const MAX_PURE_COEFFS: usize = 6;
/// The outlier limit in normal-distribution terms: a row is flagged when
/// its externally studentized residual is as unlikely as |z| > 3 is under
/// normal errors (about 0.27 % of rows, so a flag is worth a look but is
/// not proof of a bad row). See [`outlier_limit`] for the actual limit.
pub const OUTLIER_LIMIT: f64 = 3.0;

/// The |studentized residual| above which a row of a fit with `dof`
/// residual degrees of freedom is flagged: the Student-t quantile with
/// dof − 1 degrees of freedom (the distribution of an externally
/// studentized residual) and the two-sided tail probability of |z| >
/// [`OUTLIER_LIMIT`]. About 3.3 with 40 degrees of freedom, 4.5 with 10,
/// 19 with 3; infinite (nothing can be flagged) below 2.
pub fn outlier_limit(dof: usize) -> f64 {
    if dof < 2 {
        return f64::INFINITY;
    }
    stats::t_quantile_two_sided(stats::NORMAL_TAIL_3, (dof - 1) as f64)
}
/// Temperatures closer than this (°C) count as one temperature when
/// counting distinct temperatures.
pub const T_DISTINCT_C: f64 = 0.01;

/// One measured row: composition, density, temperature.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct FitRow {
    /// Mass fraction of component 1, 0–1 (w = 1 and w = 0 are pure rows).
    pub w: f64,
    /// Density, kg/m³.
    pub rho: f64,
    /// Temperature, °C.
    pub t: f64,
    /// Standard uncertainty of the density, kg/m³ (optional; either every
    /// row has one or none does).
    pub u_rho: Option<f64>,
}

impl FitRow {
    /// A row from a mass fraction, a density in kg/m³ and a temperature in
    /// °C (checked when fitted, not here).
    pub fn new(w: f64, rho: f64, t: f64) -> Self {
        Self {
            w,
            rho,
            t,
            u_rho: None,
        }
    }

    /// The same row with a standard uncertainty of the density, kg/m³.
    pub fn with_u_rho(mut self, u_rho: f64) -> Self {
        self.u_rho = Some(u_rho);
        self
    }

    /// A row whose composition is given in `basis`, converted to mass
    /// fraction with the molar masses of `components`. x = 0/1 and
    /// 0/100 % map exactly to w = 0/1, so pure rows stay pure.
    pub fn from_basis(
        basis: RowBasis,
        value: f64,
        rho: f64,
        t: f64,
        components: &[Component; 2],
    ) -> Result<Self> {
        let w = basis.to_w(value, components)?;
        Ok(Self::new(w, rho, t))
    }
}

/// The composition basis of rows handed to [`rows_from_basis`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RowBasis {
    /// Mass fraction of component 1, 0–1.
    W,
    /// % mass of component 1, 0–100.
    Abm,
    /// Mole fraction of component 1, 0–1.
    X,
}

impl RowBasis {
    fn to_w(self, value: f64, components: &[Component; 2]) -> Result<f64> {
        let (name, max) = match self {
            RowBasis::W => ("mass fraction w", 1.0),
            RowBasis::Abm => ("% mass abm", 100.0),
            RowBasis::X => ("mole fraction x", 1.0),
        };
        if !value.is_finite() {
            return Err(Error::NotFinite {
                quantity: name,
                value,
            });
        }
        if !(0.0..=max).contains(&value) {
            return Err(Error::OutOfRange {
                quantity: name,
                value,
                min: 0.0,
                max,
                unit: if max > 1.0 { "%" } else { "" },
            });
        }
        Ok(match self {
            RowBasis::W => value,
            RowBasis::Abm => value / 100.0,
            RowBasis::X => {
                let [a, b] = components;
                check_component(a)?;
                check_component(b)?;
                w_from_x(value, a.molar_mass, b.molar_mass)
            }
        })
    }
}

/// Converts rows of (composition in `basis`, density kg/m³, temperature °C)
/// to [`FitRow`]s; an error names the row (counting from 1).
pub fn rows_from_basis(
    basis: RowBasis,
    rows: &[(f64, f64, f64)],
    components: &[Component; 2],
) -> Result<Vec<FitRow>> {
    rows.iter()
        .enumerate()
        .map(|(i, &(c, rho, t))| {
            FitRow::from_basis(basis, c, rho, t, components).map_err(|e| Error::FitRow {
                row: i + 1,
                message: e.to_string(),
            })
        })
        .collect()
}

/// A pure-component density curve ρ*(t) = Σ c_m (t − t₀)^m, kg/m³.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct PureDensity {
    /// Centre temperature t₀, °C.
    pub t0: f64,
    /// Coefficients c₀, c₁, …, in kg/m³/K^m.
    pub coefficients: Vec<f64>,
}

impl PureDensity {
    /// A density that does not change with temperature, kg/m³.
    pub fn constant(rho: f64) -> Self {
        Self {
            t0: 0.0,
            coefficients: vec![rho],
        }
    }

    /// ρ*(t) = Σ c_m (t − t₀)^m with `coefficients` = [c₀, c₁, …].
    pub fn polynomial(t0: f64, coefficients: Vec<f64>) -> Self {
        Self { t0, coefficients }
    }

    /// Density (kg/m³) and its temperature derivative (kg/m³/K) at `t` °C.
    #[inline]
    pub fn eval(&self, t: f64) -> (f64, f64) {
        let d = t - self.t0;
        let (mut p, mut dp) = (0.0, 0.0);
        for &c in self.coefficients.iter().rev() {
            dp = dp * d + p;
            p = p * d + c;
        }
        (p, dp)
    }

    /// Checks coefficients and centre are finite and the count is 1 to
    /// [`MAX_PURE_COEFFS`]; `what` names the curve in messages.
    pub(crate) fn check(&self, what: &str) -> Result<()> {
        let n = self.coefficients.len();
        if n == 0 || n > MAX_PURE_COEFFS {
            return Err(Error::Invalid(format!(
                "{what}: a density polynomial needs 1 to {MAX_PURE_COEFFS} coefficients, got {n}"
            )));
        }
        if !self.t0.is_finite() || self.coefficients.iter().any(|c| !c.is_finite()) {
            return Err(Error::Invalid(format!(
                "{what}: density polynomial coefficients and centre must be finite numbers, got t0 = {} and {:?}",
                self.t0, self.coefficients
            )));
        }
        Ok(())
    }
}

/// Where a pure component's density curve comes from.
#[derive(Debug, Clone, PartialEq)]
pub enum PureSource {
    /// Fitted to the data's pure rows (w = 1 for component 1, w = 0 for
    /// component 2).
    FromData,
    /// Given by the caller.
    Given(PureDensity),
}

/// How many Redlich–Kister terms to use.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TermChoice {
    /// Chosen by AICc among 1 to `max` terms.
    Auto {
        /// Largest term count tried (at most [`MAX_TERMS`]).
        max: usize,
    },
    /// Exactly this many terms (1 to [`MAX_TERMS`]).
    Fixed(usize),
}

/// The temperature order of the coefficients A_k(t).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum OrderChoice {
    /// Chosen by AICc among 0 (constant) up to min(2, distinct
    /// temperatures − 1).
    Auto,
    /// 0 constant, 1 linear, 2 quadratic in (t − t₀).
    Fixed(usize),
}

/// What to fit: the mixture's name and components, model choices and
/// where the data come from.
#[derive(Debug, Clone, PartialEq)]
pub struct FitSpec {
    /// A short name for messages and plots.
    pub name: String,
    /// The two components (component 1 is the one whose w is given).
    pub components: [Component; 2],
    /// Term count.
    pub terms: TermChoice,
    /// Temperature order.
    pub t_order: OrderChoice,
    /// Pure-density curves of components 1 and 2.
    pub pure: [PureSource; 2],
    /// Centre t₀ (°C) of the temperature polynomials; `None` takes the
    /// mean temperature of the mixture rows.
    pub t_center: Option<f64>,
    /// Where the data came from (kept with the model when saved).
    pub source: String,
    /// A date for the data, as the caller writes it (kept as given).
    pub date: String,
}

impl FitSpec {
    /// Automatic choices, pure densities from the data, no provenance.
    pub fn new(name: impl Into<String>, components: [Component; 2]) -> Self {
        Self {
            name: name.into(),
            components,
            terms: TermChoice::Auto {
                max: DEFAULT_MAX_TERMS,
            },
            t_order: OrderChoice::Auto,
            pure: [PureSource::FromData, PureSource::FromData],
            t_center: None,
            source: String::new(),
            date: String::new(),
        }
    }
}

/// A fitted model and the report on its fit.
#[derive(Debug, Clone)]
pub struct Fit {
    /// The model, usable wherever a [`Mixture`](super::Mixture) is.
    pub model: FittedMixture,
    /// How well it describes the data.
    pub report: FitReport,
}

pub(crate) fn check_component(c: &Component) -> Result<()> {
    if c.name.trim().is_empty() {
        return Err(Error::Invalid("a component needs a name".into()));
    }
    if !c.molar_mass.is_finite() || c.molar_mass <= 0.0 {
        return Err(Error::Invalid(format!(
            "molar mass of {} must be a positive number of g/mol, got {}",
            c.name, c.molar_mass
        )));
    }
    Ok(())
}
