//! First-order (GUM) propagation of the standard uncertainties of a density
//! reading and its temperature to the strength in every basis.
//!
//! w is defined implicitly by ρ(w, t) = ρ_meas, so ∂w/∂ρ = 1/ρ_w and
//! ∂w/∂t = −ρ_t/ρ_w; u(w)² = (u_ρ/ρ_w)² + (ρ_t u_t/ρ_w)² (the two inputs
//! uncorrelated). Each basis then scales u(w) by its own derivative.

use super::composition::{dabv_dw, dx_dw, strength, Strength};
use super::error::{in_range, Result};
use super::model::{Mixture, T_PROOF_C, T_REF_C};

/// Standard uncertainties of a [`Strength`], each in its basis's unit.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct StrengthUncertainty {
    /// u(w), mass fraction.
    pub w: f64,
    /// u(% mass), % mass.
    pub abm: f64,
    /// u(x), mole fraction.
    pub x: f64,
    /// u(% vol at 20 °C), % vol.
    pub abv: f64,
    /// u(US proof), proof.
    pub proof: f64,
}

/// Strength and its standard uncertainty from a density reading.
pub fn strength_from_density<M: Mixture + ?Sized>(
    m: &M,
    rho: f64,
    t: f64,
    u_rho: f64,
    u_t: f64,
) -> Result<(Strength, StrengthUncertainty)> {
    let u_rho = in_range("density uncertainty u_density", u_rho, 0.0, 1e3, "kg/m³")?;
    let u_t = in_range("temperature uncertainty u_t", u_t, 0.0, 100.0, "K")?;
    let w = m.w_from_density(rho, t)?;
    let s = strength(m, w)?;
    let (_, rw) = m.rho_dw(w, t);
    let rt = m.drho_dt(w, t);
    let uw = ((u_rho / rw).powi(2) + (rt * u_t / rw).powi(2)).sqrt();
    let [a, b] = m.components();
    let u = StrengthUncertainty {
        w: uw,
        abm: 100.0 * uw,
        x: dx_dw(w, a.molar_mass, b.molar_mass) * uw,
        abv: dabv_dw(m, w, T_REF_C)?.abs() * uw,
        proof: 2.0 * dabv_dw(m, w, T_PROOF_C)?.abs() * uw,
    };
    Ok((s, u))
}
