//! The boundary between a sheet and whatever computes its formulas. In the
//! kernel a formula is only an opaque [`FormulaId`]; the caller (the Lua
//! binding, a test, a Rust program) implements [`Evaluator`] and is asked
//! for values row by row or a whole column at a time.
//!
//! An evaluator must read only the formula's declared dependencies: those
//! are guaranteed up to date when it is called. Other columns are visible
//! through [`RowView::get`] but may hold values that are about to be
//! recalculated.

use std::ops::Range;

use super::cells::{CellRef, ColumnRef, ColumnSink, Value};
use super::Column;

/// The caller's handle for one formula (for the Lua binding, a key to the
/// compiled function). The sheet stores it and passes it back unchanged.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct FormulaId(pub u64);

/// A failure reported by [`Evaluator::eval_rows`]: the 0-based row and the
/// evaluator's message.
#[derive(Debug, Clone, PartialEq)]
pub struct EvalError {
    /// 0-based row that failed.
    pub row: usize,
    /// What went wrong, in the evaluator's words.
    pub message: String,
}

/// Computes formula values for a sheet.
pub trait Evaluator {
    /// The value of `formula` in one row.
    fn eval_row(&mut self, formula: FormulaId, row: RowView<'_>) -> Result<Value, String>;

    /// The values of `formula` for every row of `rows`, in order, one
    /// `out.push` per row. The sheet calls this for whole-column work in
    /// chunks of at most [`CHUNK_ROWS`] rows; the default calls
    /// [`Evaluator::eval_row`] for each. Override it to do per-column
    /// set-up once (look a function up once, fetch dependency columns as
    /// slices with [`RowsView::dep_column`]).
    fn eval_rows(
        &mut self,
        formula: FormulaId,
        rows: RowsView<'_>,
        out: &mut ColumnSink,
    ) -> Result<(), EvalError> {
        for row in rows.iter() {
            match self.eval_row(formula, row) {
                Ok(v) => out.push(v),
                Err(message) => {
                    return Err(EvalError {
                        row: row.index(),
                        message,
                    })
                }
            }
        }
        Ok(())
    }

    /// Progress of whole-column work, in cells: called after each chunk of
    /// rows with the number of formula cells computed so far and the total
    /// for the operation. The default ignores it; a front end can drive a
    /// progress bar from here. Single-row work (`set`, `add_row`) does not
    /// report.
    fn on_progress(&mut self, _done: usize, _total: usize) {}
}

/// Rows per [`Evaluator::eval_rows`] call in whole-column work; progress is
/// reported between chunks.
pub const CHUNK_ROWS: usize = 8192;

/// Any `FnMut(FormulaId, RowView) -> Result<Value, String>` is an evaluator.
impl<F> Evaluator for F
where
    F: FnMut(FormulaId, RowView<'_>) -> Result<Value, String>,
{
    fn eval_row(&mut self, formula: FormulaId, row: RowView<'_>) -> Result<Value, String> {
        self(formula, row)
    }
}

/// An evaluator for sheets without formula columns; it fails if asked.
#[derive(Debug, Clone, Copy, Default)]
pub struct NoFormulas;

impl Evaluator for NoFormulas {
    fn eval_row(&mut self, formula: FormulaId, _row: RowView<'_>) -> Result<Value, String> {
        Err(format!(
            "no evaluator was given for formula {} (this sheet operation was called without one)",
            formula.0
        ))
    }
}

/// One row of a sheet as a formula sees it: the declared dependencies in
/// declaration order, plus name lookup. Cheap to copy; no allocation.
#[derive(Clone, Copy)]
pub struct RowView<'a> {
    pub(crate) cols: &'a [Column],
    pub(crate) deps: &'a [usize],
    pub(crate) row: usize,
}

impl<'a> RowView<'a> {
    /// The 0-based row index.
    pub fn index(&self) -> usize {
        self.row
    }

    /// Number of declared dependencies.
    pub fn dep_count(&self) -> usize {
        self.deps.len()
    }

    /// The value of the `k`-th declared dependency (0-based, in the order
    /// the formula declared them); `Empty` when `k` is out of range.
    #[inline]
    pub fn dep(&self, k: usize) -> CellRef<'a> {
        match self.deps.get(k) {
            Some(&c) => self.cols[c].store.cell(self.row),
            None => CellRef::Empty,
        }
    }

    /// The `k`-th dependency as a number, if it is one.
    #[inline]
    pub fn dep_number(&self, k: usize) -> Option<f64> {
        self.dep(k).as_number()
    }

    /// The name of the `k`-th dependency.
    pub fn dep_name(&self, k: usize) -> Option<&'a str> {
        self.deps.get(k).map(|&c| self.cols[c].name.as_str())
    }

    /// The cell in the column called `name`, or `None` if there is none.
    pub fn get(&self, name: &str) -> Option<CellRef<'a>> {
        self.cols
            .iter()
            .find(|c| c.name == name)
            .map(|c| c.store.cell(self.row))
    }

    /// The cell in the 0-based column `col`; `Empty` when out of range.
    pub fn cell(&self, col: usize) -> CellRef<'a> {
        self.cols
            .get(col)
            .map_or(CellRef::Empty, |c| c.store.cell(self.row))
    }

    /// Column names, in sheet order.
    pub fn column_names(&self) -> impl Iterator<Item = &'a str> {
        self.cols.iter().map(|c| c.name.as_str())
    }
}

/// A run of consecutive rows handed to [`Evaluator::eval_rows`].
#[derive(Clone, Copy)]
pub struct RowsView<'a> {
    pub(crate) cols: &'a [Column],
    pub(crate) deps: &'a [usize],
    pub(crate) start: usize,
    pub(crate) end: usize,
}

impl<'a> RowsView<'a> {
    /// The 0-based rows covered, end exclusive.
    pub fn range(&self) -> Range<usize> {
        self.start..self.end
    }

    /// Number of rows covered.
    pub fn len(&self) -> usize {
        self.end - self.start
    }

    /// Whether no rows are covered.
    pub fn is_empty(&self) -> bool {
        self.start == self.end
    }

    /// The view of one row, by its 0-based sheet index.
    pub fn row(&self, row: usize) -> RowView<'a> {
        RowView {
            cols: self.cols,
            deps: self.deps,
            row,
        }
    }

    /// The rows in order.
    pub fn iter(&self) -> impl Iterator<Item = RowView<'a>> + 'a {
        let (cols, deps) = (self.cols, self.deps);
        (self.start..self.end).map(move |row| RowView { cols, deps, row })
    }

    /// Number of declared dependencies.
    pub fn dep_count(&self) -> usize {
        self.deps.len()
    }

    /// The whole `k`-th dependency column (index it with sheet rows from
    /// [`RowsView::range`]), or `None` when `k` is out of range.
    pub fn dep_column(&self, k: usize) -> Option<ColumnRef<'a>> {
        self.deps.get(k).map(|&c| self.cols[c].store.as_ref())
    }

    /// The name of the `k`-th dependency.
    pub fn dep_name(&self, k: usize) -> Option<&'a str> {
        self.deps.get(k).map(|&c| self.cols[c].name.as_str())
    }
}
