//! The calculation kernel: pure numerics, no I/O, no Lua. Everything a
//! mixture can do is reached through the [`Mixture`] trait.

pub mod bulk;
pub mod composition;
pub mod error;
pub mod hydrometer;
pub mod model;
pub mod oiml;
pub mod solve;
pub mod uncertainty;
pub mod volumetric;

pub use composition::{Composition, Strength};
pub use error::{Error, Result};
pub use hydrometer::{HydrometerScale, GLASS_ALPHA};
pub use model::{Component, Mixture, Validity, T_PROOF_C, T_REF_C};
pub use oiml::EthanolWater;
pub use uncertainty::StrengthUncertainty;
pub use volumetric::Mixing;
