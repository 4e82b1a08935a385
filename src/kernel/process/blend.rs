//! Blending: what comes out when several lots (water among them, as a lot
//! of strength 0) are mixed.
//!
//! Mass and the mass of component 1 add; volumes do not. The blend's mass
//! fraction is Σ mᵢwᵢ / Σ mᵢ and its volume follows from the model's
//! density; the contraction is the sum of the lots' volumes at 20 °C minus
//! the blend's.

use super::lot::{require_positive, resolve, volume_20, Lot, Resolved};
use crate::kernel::error::{Error, Result};
use crate::kernel::model::Mixture;

/// A blend of lots.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Blend {
    /// True mass, kg.
    pub mass: f64,
    /// Volume at 20 °C, L.
    pub volume: f64,
    /// Mass fraction of component 1.
    pub w: f64,
    /// % vol at 20 °C.
    pub abv: f64,
    /// US proof (2 × % vol at 60 °F).
    pub proof: f64,
    /// Litres of pure alcohol at 20 °C, from the blend's own volume and
    /// strength: `volume × abv / 100`.
    pub lpa: f64,
    /// Sum of the lots' volumes at 20 °C, L.
    pub lots_volume_20: f64,
    /// Volume lost on mixing, L at 20 °C: `lots_volume_20 − volume`.
    pub contraction: f64,
}

/// Mixes the lots (at least one; amounts may be zero but not all of them).
/// An error in a lot names it (`lot 2: …`, counting from 1).
pub fn blend<M: Mixture + ?Sized>(m: &M, lots: &[Lot]) -> Result<Blend> {
    let resolved = lots
        .iter()
        .enumerate()
        .map(|(i, lot)| resolve(m, lot).map_err(|e| e.context(format!("lot {}", i + 1))))
        .collect::<Result<Vec<_>>>()?;
    blend_resolved(m, &resolved)
}

/// The blend of lots already reduced to mass and mass fraction.
pub(crate) fn blend_resolved<M: Mixture + ?Sized>(m: &M, lots: &[Resolved]) -> Result<Blend> {
    if lots.is_empty() {
        return Err(Error::Invalid("a blend needs at least one lot".into()));
    }
    let mass: f64 = lots.iter().map(|l| l.mass).sum();
    require_positive("the total amount of the blend", mass, "kg")?;
    let alcohol: f64 = lots.iter().map(|l| l.mass * l.w).sum();
    // The exact mean lies between the lots' extremes; rounding must not push
    // it past them (e.g. above w = 1 when every lot is pure).
    let (lo, hi) = lots
        .iter()
        .filter(|l| l.mass > 0.0)
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), l| {
            (lo.min(l.w), hi.max(l.w))
        });
    let w = (alcohol / mass).clamp(lo, hi);
    let s = m.strength(w)?;
    let volume = volume_20(m, mass, w)?;
    let lots_volume_20 = lots
        .iter()
        .map(|l| volume_20(m, l.mass, l.w))
        .sum::<Result<f64>>()?;
    Ok(Blend {
        mass,
        volume,
        w,
        abv: s.abv,
        proof: s.proof,
        lpa: volume * s.abv / 100.0,
        lots_volume_20,
        contraction: lots_volume_20 - volume,
    })
}
