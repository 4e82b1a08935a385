//! Pure-alcohol accounting for a lot: litres of pure alcohol at 20 °C and US
//! proof gallons, from a gauged volume or a weighed mass.
//!
//! Definitions (component 1 is "alcohol"; for ethanol–water, ethanol):
//! - litres of pure alcohol (LPA): the volume the component-1 content of the
//!   lot would occupy as the pure liquid at 20 °C, i.e. the lot's volume at
//!   20 °C × its % vol at 20 °C / 100;
//! - US proof gallon: one US gallon (3.785411784 L) at 60 °F of spirit of
//!   100 proof (50 % vol at 60 °F); a lot's proof gallons are its wine
//!   gallons (its volume in US gallons at 60 °F) × its proof / 100, the
//!   proof also taken at 60 °F.
//!
//! Both follow from the conserved masses: LPA = 1000 m w / ρ₁(20 °C) and
//! proof gallons = 2 × 1000 m w / ρ₁(60 °F) / 3.785411784 (ρ₁ the density of
//! pure component 1); the code goes through the lot's own volume and
//! strength, as a gauger would, and the tests check the identity.

use super::lot::{resolve, volume_at, Lot};
use super::units::US_GALLON_L;
use crate::kernel::error::Result;
use crate::kernel::model::{Mixture, T_PROOF_C, T_REF_C};

/// The alcohol content of a lot, with the figures it was computed from.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct PureAlcohol {
    /// True mass of the lot (in vacuum), kg.
    pub mass: f64,
    /// Volume of the lot at 20 °C, L.
    pub volume_20: f64,
    /// Litres of pure alcohol at 20 °C: `volume_20 × abv / 100`.
    pub lpa: f64,
    /// Volume of the lot at 60 °F in US gallons ("wine gallons").
    pub wine_gallons: f64,
    /// US proof gallons: `wine_gallons × proof / 100`.
    pub proof_gallons: f64,
    /// Mass fraction of component 1.
    pub w: f64,
    /// % vol at 20 °C.
    pub abv: f64,
    /// US proof (2 × % vol at 60 °F).
    pub proof: f64,
}

/// Pure alcohol in a lot gauged by volume (at its temperature) or by mass
/// (true, or weighed in air with buoyancy correction); strength in any
/// basis. A zero amount gives zero.
pub fn pure_alcohol<M: Mixture + ?Sized>(m: &M, lot: &Lot) -> Result<PureAlcohol> {
    let r = resolve(m, lot)?;
    let s = m.strength(r.w)?;
    let volume_20 = volume_at(m, r.mass, r.w, T_REF_C)?;
    let volume_60f = volume_at(m, r.mass, r.w, T_PROOF_C)?;
    let wine_gallons = volume_60f / US_GALLON_L;
    Ok(PureAlcohol {
        mass: r.mass,
        volume_20,
        lpa: volume_20 * s.abv / 100.0,
        wine_gallons,
        proof_gallons: wine_gallons * s.proof / 100.0,
        w: r.w,
        abv: s.abv,
        proof: s.proof,
    })
}
