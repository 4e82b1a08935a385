//! The kernel's one error type. Messages are lowercase, quote the offending
//! value and name the valid range, so a front end can print them as they are.

use thiserror::Error;

/// Everything that can go wrong in a kernel calculation.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum Error {
    /// A NaN or infinite input.
    #[error("{quantity} must be a finite number, got {value}")]
    NotFinite {
        /// What the value stands for, e.g. `"density"`.
        quantity: &'static str,
        /// The offending value.
        value: f64,
    },

    /// A finite input outside the range where the model or formula holds.
    #[error(
        "{quantity} = {value}{} is outside the valid range {min} to {max}{}",
        unit_suffix(unit),
        unit_suffix(unit)
    )]
    OutOfRange {
        /// What the value stands for, e.g. `"temperature t"`.
        quantity: &'static str,
        /// The offending value.
        value: f64,
        /// Lowest valid value.
        min: f64,
        /// Highest valid value.
        max: f64,
        /// Unit of all three numbers; empty for dimensionless quantities.
        unit: &'static str,
    },

    /// A measured density that no composition reaches at that temperature.
    #[error(
        "density {density} kg/m³ at {t} °C is not reachable by {model}: \
         at that temperature it spans {min:.4} to {max:.4} kg/m³"
    )]
    Unreachable {
        /// Name of the model, as [`crate::kernel::Mixture::name`] gives it.
        model: String,
        /// The measured density, kg/m³.
        density: f64,
        /// The temperature of the measurement, °C.
        t: f64,
        /// Lowest density the model reaches at `t`, kg/m³.
        min: f64,
        /// Highest density the model reaches at `t`, kg/m³.
        max: f64,
    },

    /// An iterative solve that did not meet its tolerance (a bug or a
    /// pathological model; never returned silently).
    #[error("{what} did not converge after {iterations} iterations (residual {residual:e})")]
    NoConvergence {
        /// Which solve, e.g. `"density solve"`.
        what: &'static str,
        /// Iterations spent.
        iterations: usize,
        /// Remaining residual of the equation being solved.
        residual: f64,
    },

    /// A bad point in a slice (bulk) call: which one, and what is wrong.
    #[error("point {index}: {source}")]
    AtPoint {
        /// Index of the first bad point in the input slices.
        index: usize,
        /// What is wrong with it.
        source: Box<Error>,
    },

    /// Any other invalid argument, described in words.
    #[error("{0}")]
    Invalid(String),
}

/// " °C" for "°C", nothing for a dimensionless quantity, so that messages
/// read "w = 1.5 is outside …" rather than leaving a stray space.
fn unit_suffix(unit: &str) -> String {
    if unit.is_empty() {
        String::new()
    } else {
        format!(" {unit}")
    }
}

/// Kernel result alias.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Rejects NaN and infinities, naming the quantity.
pub fn finite(quantity: &'static str, value: f64) -> Result<f64> {
    if value.is_finite() {
        Ok(value)
    } else {
        Err(Error::NotFinite { quantity, value })
    }
}

/// Rejects non-finite values and values outside `[min, max]`.
pub fn in_range(
    quantity: &'static str,
    value: f64,
    min: f64,
    max: f64,
    unit: &'static str,
) -> Result<f64> {
    finite(quantity, value)?;
    if value < min || value > max {
        return Err(Error::OutOfRange {
            quantity,
            value,
            min,
            max,
            unit,
        });
    }
    Ok(value)
}

/// Rejects non-finite values and values that are not strictly positive.
pub fn positive(quantity: &'static str, value: f64, unit: &'static str) -> Result<f64> {
    in_range(quantity, value, f64::MIN_POSITIVE, f64::MAX, unit)
}
