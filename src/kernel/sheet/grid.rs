//! Two-way tables: a value computed for every pair (row value, column
//! value), e.g. density for each % vol × temperature. The caller supplies
//! the value function; the grid lays the results out as a sheet, either in
//! long form (one row per pair) or wide form (one column per column value).

use super::cells::ColumnData;
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
        self.check()?;
        let total = self.points();
        let (mut rs, mut cs, mut vs) = (
            Vec::with_capacity(total),
            Vec::with_capacity(total),
            Vec::with_capacity(total),
        );
        for &r in self.row_values {
            for &c in self.col_values {
                rs.push(r);
                cs.push(c);
                vs.push(self.value(&mut f, r, c)?);
            }
            on_progress(vs.len(), total);
        }
        Sheet::from_columns(vec![
            (self.row_name, ColumnData::Numbers(rs)),
            (self.col_name, ColumnData::Numbers(cs)),
            (value_name, ColumnData::Numbers(vs)),
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
        self.check()?;
        let total = self.points();
        let nr = self.row_values.len();
        let mut cols: Vec<Vec<f64>> = vec![Vec::with_capacity(nr); self.col_values.len()];
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
            columns.push((format!("{}={c}", self.col_name), ColumnData::Numbers(v)));
        }
        Sheet::from_columns(columns)
    }

    fn value<F>(&self, f: &mut F, r: f64, c: f64) -> Result<f64>
    where
        F: FnMut(f64, f64) -> Result<f64, String>,
    {
        let at = || format!("{} = {r}, {} = {c}", self.row_name, self.col_name);
        match f(r, c) {
            Ok(v) if v.is_finite() => Ok(v),
            Ok(v) => Err(Error::Invalid(format!(
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
