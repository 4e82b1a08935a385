//! Composition bases and conversions between them, for any [`Mixture`].
//!
//! Bases: `w` mass fraction of component 1; `abm` % mass; `x` mole fraction;
//! `abv` % vol at a reference temperature (volume of pure component 1 per
//! volume of mixture, both at that temperature; 20 °C by default); `proof`
//! US proof, twice the % vol at 60 °F; a density measured at a temperature.

use super::error::{in_range, Result};
use super::model::{Mixture, T_PROOF_C, T_REF_C};
use super::solve::{polish_increasing, solve_increasing_with_ends};

/// A composition in one basis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Composition {
    /// Mass fraction of component 1, 0–1.
    W(f64),
    /// % mass of component 1, 0–100.
    Abm(f64),
    /// Mole fraction of component 1, 0–1.
    X(f64),
    /// % vol of component 1 referred to `t_ref` °C, 0–100.
    Abv {
        /// % vol, 0–100.
        abv: f64,
        /// Reference temperature of the % vol, °C (20 in most of the world).
        t_ref: f64,
    },
    /// US proof (twice the % vol at 60 °F), 0–200.
    Proof(f64),
    /// A density in kg/m³ measured at `t` °C.
    Density {
        /// Measured density, kg/m³.
        rho: f64,
        /// Temperature of the measurement, °C.
        t: f64,
    },
}

impl Composition {
    /// % vol at the usual 20 °C reference.
    pub fn abv(abv: f64) -> Self {
        Composition::Abv {
            abv,
            t_ref: T_REF_C,
        }
    }
}

/// One composition expressed in every basis.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Strength {
    /// Mass fraction of component 1, 0–1.
    pub w: f64,
    /// % mass.
    pub abm: f64,
    /// Mole fraction of component 1.
    pub x: f64,
    /// % vol at 20 °C.
    pub abv: f64,
    /// US proof (2 × % vol at 60 °F).
    pub proof: f64,
}

/// Mole fraction from mass fraction, molar masses in any one unit.
pub fn x_from_w(w: f64, m1: f64, m2: f64) -> f64 {
    let n1 = w / m1;
    let n2 = (1.0 - w) / m2;
    if n1 + n2 == 0.0 {
        0.0
    } else {
        n1 / (n1 + n2)
    }
}

/// Mass fraction from mole fraction.
pub fn w_from_x(x: f64, m1: f64, m2: f64) -> f64 {
    let a = x * m1;
    let b = (1.0 - x) * m2;
    a / (a + b)
}

/// dx/dw, for uncertainty propagation.
pub fn dx_dw(w: f64, m1: f64, m2: f64) -> f64 {
    let s = w / m1 + (1.0 - w) / m2;
    1.0 / (m1 * m2 * s * s)
}

/// % vol at `t_ref` of mass fraction `w` (both checked against the model's
/// validity range).
pub fn abv<M: Mixture + ?Sized>(m: &M, w: f64, t_ref: f64) -> Result<f64> {
    let w = m.check_w(w)?;
    let rho1 = m.pure_density(0, t_ref)?;
    // Rounding in a high-degree density polynomial jitters ρ by ~1e-13
    // relative just below w = 1, which can put the ratio a hair above 100 %
    // vol; clamp so that every computed % vol converts back without a range
    // error.
    Ok((100.0 * (w * (m.rho(w, t_ref) / rho1))).clamp(0.0, 100.0))
}

/// d(% vol)/dw at `t_ref` (both checked).
pub fn dabv_dw<M: Mixture + ?Sized>(m: &M, w: f64, t_ref: f64) -> Result<f64> {
    let w = m.check_w(w)?;
    let rho1 = m.pure_density(0, t_ref)?;
    let (r, dr) = m.rho_dw(w, t_ref);
    Ok(100.0 * (r + w * dr) / rho1)
}

/// Newton steps tried from a model's close guess before the bracketed solve.
const POLISH_STEPS: usize = 3;

/// Mass fraction whose % vol at `t_ref` is `abv` (w ρ(w) is increasing in w
/// for any physical mixture; the solve is bracketed regardless). With a
/// close guess from the model ([`Mixture::guess_w_from_abv`]) plain Newton
/// usually settles in two steps; otherwise, or if it does not, the
/// bracketed solve runs.
fn w_from_abv<M: Mixture + ?Sized>(m: &M, abv: f64, t_ref: f64) -> Result<f64> {
    let v = m.validity();
    let t_ref = m.check_t(t_ref)?;
    if v.w_max < 1.0 {
        // No pure component 1: `pure_density` reports it.
        m.pure_density(0, t_ref)?;
    }
    // Both pure densities in one go (closed forms where the model has them):
    // ρ₁ for the target, ρ at w_min for the crude guess and the bracket.
    let (rho_lo, rho1) = m.rho_at_ends(t_ref);
    // abv/100 first, so that 100 % vol is ρ₁ exactly and returns w_max.
    let target = abv / 100.0 * rho1;
    let (fa, fb) = (v.w_min * rho_lo, v.w_max * rho1);
    let f = |w: f64| {
        let (r, dr) = m.rho_dw(w, t_ref);
        (w * r, r + w * dr)
    };
    if target > fa && target < fb {
        if let Some(w) = m
            .guess_w_from_abv(abv, t_ref)
            .and_then(|g| polish_increasing(f, target, v.w_min, v.w_max, g, POLISH_STEPS))
        {
            return Ok(w);
        }
    }
    let guess = (abv / 100.0 * rho1 / rho_lo).clamp(v.w_min, v.w_max);
    solve_increasing_with_ends(f, target, v.w_min, v.w_max, fa, fb, guess, "% vol")
}

/// Converts a composition in any basis to mass fraction, checking ranges.
pub fn to_w<M: Mixture + ?Sized>(m: &M, c: Composition) -> Result<f64> {
    let [a, b] = m.components();
    let w = match c {
        Composition::W(w) => w,
        Composition::Abm(p) => in_range("% mass abm", p, 0.0, 100.0, "%")? / 100.0,
        Composition::X(x) => w_from_x(
            in_range("mole fraction x", x, 0.0, 1.0, "")?,
            a.molar_mass,
            b.molar_mass,
        ),
        Composition::Abv { abv, t_ref } => {
            let abv = in_range("% vol abv", abv, 0.0, 100.0, "%")?;
            let t_ref = m.check_t(t_ref)?;
            w_from_abv(m, abv, t_ref)?
        }
        Composition::Proof(p) => {
            let p = in_range("US proof", p, 0.0, 200.0, "proof")?;
            w_from_abv(m, p / 2.0, T_PROOF_C)?
        }
        Composition::Density { rho, t } => m.w_from_density(rho, t)?,
    };
    m.check_w(w)
}

/// Every basis for mass fraction `w` (checked).
pub fn strength<M: Mixture + ?Sized>(m: &M, w: f64) -> Result<Strength> {
    let w = m.check_w(w)?;
    let [a, b] = m.components();
    Ok(Strength {
        w,
        abm: 100.0 * w,
        x: x_from_w(w, a.molar_mass, b.molar_mass),
        abv: abv(m, w, T_REF_C)?,
        proof: 2.0 * abv(m, w, T_PROOF_C)?,
    })
}
