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

    /// Valid inputs whose goal cannot be met (a reduction target at or above
    /// the lot's strength, a blend target no mix of the lots reaches); the
    /// text says why.
    #[error("cannot meet the target: {0}")]
    Infeasible(String),

    /// An error in one item of a list (e.g. `lot 3`), with the item named.
    #[error("{context}: {source}")]
    Context {
        /// The item, e.g. `lot 3`.
        context: String,
        /// What went wrong with it.
        source: Box<Error>,
    },

    /// A sheet column name that does not exist; lists the columns that do.
    #[error("unknown column \"{name}\"; the columns are: {}", quote_list(.columns))]
    UnknownColumn {
        /// The name asked for.
        name: String,
        /// The sheet's column names, in order.
        columns: Vec<String>,
    },

    /// Formula columns that depend on each other in a loop, in loop order
    /// (the first name is repeated at the end).
    #[error("formula columns form a cycle: {}", .columns.join(" → "))]
    Cycle {
        /// Column names around the loop, first repeated at the end.
        columns: Vec<String>,
    },

    /// A bad value in one sheet cell: a non-finite number, a failed formula.
    /// `row` is 0-based; the message counts rows from 1 (index 0 is "row 1").
    #[error("column \"{column}\", row {}: {message}", .row + 1)]
    Cell {
        /// Column name.
        column: String,
        /// 0-based row index.
        row: usize,
        /// What is wrong with the cell.
        message: String,
    },

    /// Malformed CSV input. `line` and `column` (the field number) count
    /// from 1; `column` is absent when the fault concerns a whole record.
    #[error("csv line {line}{}: {message}", .column.map(|c| format!(", column {c}")).unwrap_or_default())]
    Csv {
        /// 1-based line of the input.
        line: u64,
        /// 1-based field number, when the fault is in one field.
        column: Option<usize>,
        /// What is wrong and how to fix it.
        message: String,
    },

    /// A read or write on a caller's reader or writer failed.
    #[error("i/o error: {message}")]
    Io {
        /// The kind of the underlying `std::io::Error`.
        kind: std::io::ErrorKind,
        /// Its message.
        message: String,
    },

    /// A bad row in the data given to a fit; `row` counts from 1.
    #[error("fit data row {row}: {message}")]
    FitRow { row: usize, message: String },

    /// A fit that cannot be made as asked (too few points, rank-deficient
    /// design, missing pure-component data, …).
    #[error("cannot fit: {0}")]
    Fit(String),

    /// A saved fitted model that cannot be read back.
    #[error("fitted-mixture file: {0}")]
    SavedModel(String),
}

impl Error {
    /// Wraps the error with the name of the item it concerns.
    pub fn context(self, context: impl Into<String>) -> Self {
        Error::Context {
            context: context.into(),
            source: Box::new(self),
        }
    }
}

fn quote_list(names: &[String]) -> String {
    if names.is_empty() {
        return "(none)".to_string();
    }
    names
        .iter()
        .map(|n| format!("\"{n}\""))
        .collect::<Vec<_>>()
        .join(", ")
}

impl From<std::io::Error> for Error {
    fn from(e: std::io::Error) -> Self {
        Error::Io {
            kind: e.kind(),
            message: e.to_string(),
        }
    }
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
