//! Glass hydrometer readings taken away from the calibration temperature.
//!
//! A hydrometer's scale mark for a strength R stands where it floats in a
//! liquid of that strength at the calibration temperature t₀, i.e. in a
//! density ρ_R = ρ(R, t₀). At t the glass has expanded by 1 + α(t − t₀)
//! (α its cubic expansion coefficient), so the immersed volume up to the mark
//! is that much larger and the liquid it floats in at the mark has density
//! ρ_R / (1 + α(t − t₀)). The true strength follows from that density at t.
//! Surface-tension effects are neglected.

use super::composition::{strength, Composition, Strength};
use super::error::{in_range, Result};
use super::model::{Mixture, T_PROOF_C, T_REF_C};

/// Default cubic expansion coefficient of hydrometer glass, 1/K
/// (common practice for soda-lime and borosilicate instrument glass).
pub const GLASS_ALPHA: f64 = 25e-6;

/// What a hydrometer is graduated in.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum HydrometerScale {
    /// % vol, calibrated at 20 °C, with the glass's expansion coefficient.
    AbvAt20 {
        /// Cubic expansion coefficient of the glass, 1/K.
        alpha: f64,
    },
    /// US proof, calibrated at 60 °F, with the glass's expansion coefficient.
    ProofAt60F {
        /// Cubic expansion coefficient of the glass, 1/K.
        alpha: f64,
    },
}

impl HydrometerScale {
    /// A % vol hydrometer with the default glass.
    pub fn abv() -> Self {
        HydrometerScale::AbvAt20 { alpha: GLASS_ALPHA }
    }
    /// A US proof hydrometer with the default glass.
    pub fn proof() -> Self {
        HydrometerScale::ProofAt60F { alpha: GLASS_ALPHA }
    }
}

/// True strength from reading `reading` at `t` °C.
pub fn true_strength<M: Mixture + ?Sized>(
    m: &M,
    scale: HydrometerScale,
    reading: f64,
    t: f64,
) -> Result<Strength> {
    let t = m.check_t(t)?;
    let (comp, t0, alpha) = match scale {
        HydrometerScale::AbvAt20 { alpha } => (Composition::abv(reading), T_REF_C, alpha),
        HydrometerScale::ProofAt60F { alpha } => (Composition::Proof(reading), T_PROOF_C, alpha),
    };
    let alpha = in_range("glass expansion coefficient alpha", alpha, 0.0, 1e-4, "1/K")?;
    let rho_mark = m.density_of(comp, t0)?;
    let rho = rho_mark / (1.0 + alpha * (t - t0));
    let w = m.w_from_density(rho, t)?;
    strength(m, w)
}
