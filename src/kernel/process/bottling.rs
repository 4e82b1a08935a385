//! Bottling: how many whole bottles of a labelled size a lot fills.
//!
//! A bottle's labelled volume is taken at 20 °C (the reference of % vol), so
//! the lot's volume is brought to 20 °C first; what is left over after the
//! last whole bottle is the remainder.

use super::lot::{resolve, volume_20, Lot, MAX_AMOUNT};
use crate::kernel::error::{in_range, Error, Result};
use crate::kernel::model::Mixture;

/// Largest bottle count reported; beyond 2⁵³ an f64 volume no longer
/// resolves single bottles.
const MAX_BOTTLES: f64 = 9_007_199_254_740_992.0;

/// Slack for a last bottle that rounding leaves a hair short, so that a lot
/// of exactly n bottles gives n bottles and no remainder: a part in 10⁹ of
/// the bottle, plus a part in 10¹³ of the lot (a few hundred rounding
/// errors of its volume).
const FILL_SLACK_BOTTLE: f64 = 1e-9;
const FILL_SLACK_LOT: f64 = 1e-13;

/// Whole bottles and what remains.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct Bottling {
    /// Whole bottles filled.
    pub bottles: u64,
    /// Liquid left after the last whole bottle, L at 20 °C.
    pub remainder_l: f64,
    /// The lot's volume at 20 °C, L.
    pub volume_20: f64,
}

/// Whole bottles of `bottle_l` L (labelled volume, at 20 °C) that `lot` fills.
pub fn bottling<M: Mixture + ?Sized>(m: &M, lot: &Lot, bottle_l: f64) -> Result<Bottling> {
    let size = in_range("bottle size", bottle_l, f64::MIN_POSITIVE, MAX_AMOUNT, "L")?;
    let r = resolve(m, lot).map_err(|e| e.context("lot"))?;
    let volume = volume_20(m, r.mass, r.w)?;
    let ratio = volume / size;
    if ratio >= MAX_BOTTLES {
        return Err(Error::Invalid(format!(
            "{volume} L in bottles of {size} L is more than {MAX_BOTTLES:e} bottles; \
             use a larger bottle size"
        )));
    }
    let mut n = ratio.floor();
    let mut remainder = volume - n * size;
    if size - remainder <= FILL_SLACK_BOTTLE * size + FILL_SLACK_LOT * volume {
        n += 1.0;
        remainder = 0.0;
    }
    Ok(Bottling {
        // n is a whole number in [0, 2⁵³], so the cast is exact.
        bottles: n as u64,
        remainder_l: remainder.max(0.0),
        volume_20: volume,
    })
}
