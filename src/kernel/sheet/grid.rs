//! Two-way tables: a value computed for every pair (row value, column
//! value), e.g. density for each % vol × temperature. The caller supplies
//! the value function; the grid lays the results out as a sheet, either in
//! long form (one row per pair) or wide form (one column per column value).

use super::cells::{ColumnData, Value};
use super::Sheet;
use crate::kernel::error::{Error, Result};

/// The two variables of a two-way table and the values each takes.
#[derive(Debug, Clone, Copy)]
pub struct Grid<'a> {
    /// Name of the row variable, e.g. `"abv"`.
    pub row_name: &'a str,
    /// Values of the row variable, top to bottom (finite).
    pub row_values: &'a [f64],
    /// Name of the column variable, e.g. `"t"`.
    pub col_name: &'a str,
    /// Values of the column variable, left to right (finite).
    pub col_values: &'a [f64],
}

impl Grid<'_> {
    /// Number of (row, column) pairs.
    pub fn points(&self) -> usize {
        self.row_values.len() * self.col_values.len()
    }

    /// Long form: columns `row_name`, `col_name`, `value_name`; one row per
    /// pair, row value outer and column value inner (the first rows hold
    /// the first row value with every column value).
    ///
    /// `f(r, c)` gives the value; an `Err` or a non-finite result stops the
    /// build with an error naming the pair. `on_progress(done, total)` is
    /// called after each row value with points done so far.
    pub fn long<F>(
        &self,
        value_name: &str,
        mut f: F,
        on_progress: &mut dyn FnMut(usize, usize),
    ) -> Result<Sheet>
    where
        F: FnMut(f64, f64) -> Result<f64, String>,
    {
        self.long_partial(value_name, |r, c| f(r, c).map(Some), on_progress)
    }

    /// [`Grid::long`] for a table with gaps: `f(r, c)` returns `Ok(None)`
    /// where the pair has no value (e.g. outside a model's validity range),
    /// and that cell is left empty. The value column stays numeric when
    /// there is no gap.
    pub fn long_partial<F>(
        &self,
        value_name: &str,
        mut f: F,
        on_progress: &mut dyn FnMut(usize, usize),
    ) -> Result<Sheet>
    where
        F: FnMut(f64, f64) -> Result<Option<f64>, String>,
    {
        self.check()?;
        let total = self.points();
        let (mut rs, mut cs, mut vs) = (
            Vec::with_capacity(total),
            Vec::with_capacity(total),
            Gapped::with_capacity(total),
        );
        for &r in self.row_values {
            for &c in self.col_values {
                rs.push(r);
                cs.push(c);
                vs.push(self.value(&mut f, r, c)?);
            }
            on_progress(rs.len(), total);
        }
        Sheet::from_columns(vec![
            (self.row_name, ColumnData::Numbers(rs)),
            (self.col_name, ColumnData::Numbers(cs)),
            (value_name, vs.into_data()),
        ])
    }

    /// Wide form: a first column `row_name` with the row values, then one
    /// column per column value, named `"{col_name}={value}"` (the value
    /// printed in shortest round-trip form, e.g. `t=15.5`).
    ///
    /// `f`, errors and progress as in [`Grid::long`]. Repeated column
    /// values give repeated names, which is an error.
    pub fn wide<F>(&self, mut f: F, on_progress: &mut dyn FnMut(usize, usize)) -> Result<Sheet>
    where
        F: FnMut(f64, f64) -> Result<f64, String>,
    {
        self.wide_partial(|r, c| f(r, c).map(Some), on_progress)
    }

    /// [`Grid::wide`] for a table with gaps, as [`Grid::long_partial`].
    pub fn wide_partial<F>(
        &self,
        mut f: F,
        on_progress: &mut dyn FnMut(usize, usize),
    ) -> Result<Sheet>
    where
        F: FnMut(f64, f64) -> Result<Option<f64>, String>,
    {
        self.check()?;
        let total = self.points();
        let nr = self.row_values.len();
        let mut cols: Vec<Gapped> = (0..self.col_values.len())
            .map(|_| Gapped::with_capacity(nr))
            .collect();
        let mut done = 0;
        for &r in self.row_values {
            for (j, &c) in self.col_values.iter().enumerate() {
                cols[j].push(self.value(&mut f, r, c)?);
            }
            done += self.col_values.len();
            on_progress(done, total);
        }
        let mut columns = vec![(
            self.row_name.to_string(),
            ColumnData::Numbers(self.row_values.to_vec()),
        )];
        for (&c, v) in self.col_values.iter().zip(cols) {
            columns.push((format!("{}={c}", self.col_name), v.into_data()));
        }
        Sheet::from_columns(columns)
    }

    fn value<F>(&self, f: &mut F, r: f64, c: f64) -> Result<Option<f64>>
    where
        F: FnMut(f64, f64) -> Result<Option<f64>, String>,
    {
        let at = || format!("{} = {r}, {} = {c}", self.row_name, self.col_name);
        match f(r, c) {
            Ok(None) => Ok(None),
            Ok(Some(v)) if v.is_finite() => Ok(Some(v)),
            Ok(Some(v)) => Err(Error::Invalid(format!(
                "table value at {} must be a finite number, got {v}",
                at()
            ))),
            Err(m) => Err(Error::Invalid(format!(
                "table value at {} failed: {m}",
                at()
            ))),
        }
    }

    fn check(&self) -> Result<()> {
        for (name, values) in [
            (self.row_name, self.row_values),
            (self.col_name, self.col_values),
        ] {
            if let Some((i, v)) = values.iter().enumerate().find(|(_, v)| !v.is_finite()) {
                return Err(Error::Invalid(format!(
                    "table variable \"{name}\": value {} must be a finite number, got {v}",
                    i + 1
                )));
            }
        }
        Ok(())
    }
}

/// A column of table values that stays a plain `Vec<f64>` until the first
/// gap, so a table without gaps costs no more than before.
enum Gapped {
    Numbers(Vec<f64>),
    Values(Vec<Value>),
}

impl Gapped {
    fn with_capacity(n: usize) -> Self {
        Gapped::Numbers(Vec::with_capacity(n))
    }

    fn push(&mut self, v: Option<f64>) {
        match (&mut *self, v) {
            (Gapped::Numbers(xs), Some(x)) => xs.push(x),
            (Gapped::Values(vs), v) => vs.push(Value::from(v)),
            (Gapped::Numbers(xs), None) => {
                let mut vs: Vec<Value> = Vec::with_capacity(xs.capacity());
                vs.extend(xs.iter().map(|&x| Value::Number(x)));
                vs.push(Value::Empty);
                *self = Gapped::Values(vs);
            }
        }
    }

    fn into_data(self) -> ColumnData {
        match self {
            Gapped::Numbers(xs) => ColumnData::Numbers(xs),
            Gapped::Values(vs) => ColumnData::Values(vs),
        }
    }
}
