//! Sheets: spreadsheet-style tables whose columns are either data or
//! formulas computed from other columns of the same row.
//!
//! # Model
//!
//! - A [`Sheet`] has ordered, uniquely named columns and `nrows` rows. A
//!   cell is a [`Value`]: a finite number, a text or empty.
//! - A *data* column holds values given by the caller. A *formula* column
//!   holds values computed per row from the same row's cells in the columns
//!   it declares as dependencies. The formula itself is opaque here: the
//!   sheet stores the caller's [`FormulaId`] and asks an [`Evaluator`] for
//!   values. Formulas are row-local, so filtering or sorting rows never
//!   invalidates a formula value.
//! - Formula columns are computed in dependency order; a cycle is refused
//!   when the formula is added, with the columns of the cycle named.
//! - Every change keeps the sheet consistent: after `set`, `set_column`,
//!   `add_row` or `add_formula` returns `Ok`, each formula cell equals its
//!   formula applied to its row. On `Err` the sheet is left exactly as it
//!   was (no half-updated column, no lost data).
//!
//! # Indices
//!
//! Rows and columns are **0-based** in this Rust API. The Lua binding adds
//! one at its boundary. Error *messages* count rows from 1, as a person
//! would (index 0 is "row 1"), so they read the same from Lua and Rust.
//!
//! # Storage
//!
//! Column-major. A column whose cells are all numbers is a `Vec<f64>` and
//! [`Sheet::column`] returns it as a slice; other columns hold [`Value`]s.

mod cells;
mod csv_io;
mod eval;
mod graph;
mod grid;
mod json;
mod render;

pub use cells::{CellRef, ColumnData, ColumnRef, ColumnSink, Value};
pub use csv_io::CsvOptions;
pub use eval::{EvalError, Evaluator, FormulaId, NoFormulas, RowView, RowsView, CHUNK_ROWS};
pub use grid::Grid;
pub use json::JsonLayout;
pub use render::RenderOptions;

use std::cmp::Ordering;

use super::error::{Error, Result};
use cells::Store;

/// One column: its name, its cells and, for a formula column, the formula.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Column {
    pub(crate) name: String,
    pub(crate) store: Store,
    pub(crate) formula: Option<Formula>,
}

/// A formula column's definition: the caller's id and the 0-based indices
/// of its dependencies, in the order the caller declared them.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Formula {
    pub(crate) id: FormulaId,
    pub(crate) deps: Vec<usize>,
}

/// A formula column's definition, as [`Sheet::formula`] reports it.
#[derive(Debug, Clone, PartialEq)]
pub struct FormulaInfo<'a> {
    /// The caller's id for the formula.
    pub id: FormulaId,
    /// The dependency column names, in declared order.
    pub deps: Vec<&'a str>,
}

/// A table of named columns, some of them formulas. See the module docs.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Sheet {
    columns: Vec<Column>,
    nrows: usize,
    /// Formula columns in dependency order (kept in step with `columns`).
    order: Vec<usize>,
}

/// Which rows a recalculation covers.
#[derive(Clone, Copy)]
enum Rows {
    All,
    One(usize),
}

impl Sheet {
    /// An empty sheet (no rows) with these data columns. Names must be
    /// unique and not blank.
    pub fn new<S: AsRef<str>>(names: &[S]) -> Result<Sheet> {
        let mut s = Sheet::default();
        for n in names {
            s.check_new_name(n.as_ref())?;
            s.columns.push(Column {
                name: n.as_ref().to_string(),
                store: Store::default(),
                formula: None,
            });
        }
        Ok(s)
    }

    /// A sheet of data columns, all of the same length.
    pub fn from_columns<S: Into<String>>(columns: Vec<(S, ColumnData)>) -> Result<Sheet> {
        let mut s = Sheet::default();
        for (name, data) in columns {
            s.add_column(&name.into(), data)?;
        }
        Ok(s)
    }

    /// Number of rows.
    pub fn nrows(&self) -> usize {
        self.nrows
    }

    /// Number of columns (data and formula).
    pub fn ncols(&self) -> usize {
        self.columns.len()
    }

    /// Column names, in order.
    pub fn column_names(&self) -> Vec<&str> {
        self.columns.iter().map(|c| c.name.as_str()).collect()
    }

    /// The 0-based index of the column called `name`.
    pub fn column_index(&self, name: &str) -> Result<usize> {
        self.columns
            .iter()
            .position(|c| c.name == name)
            .ok_or_else(|| self.unknown(name))
    }

    /// Whether a column called `name` exists.
    pub fn has_column(&self, name: &str) -> bool {
        self.columns.iter().any(|c| c.name == name)
    }

    /// The formula of column `name`, or `None` for a data column.
    pub fn formula(&self, name: &str) -> Result<Option<FormulaInfo<'_>>> {
        let c = self.column_index(name)?;
        Ok(self.columns[c].formula.as_ref().map(|f| FormulaInfo {
            id: f.id,
            deps: f
                .deps
                .iter()
                .map(|&d| self.columns[d].name.as_str())
                .collect(),
        }))
    }

    /// The cell at 0-based `row` in column `col`.
    pub fn get(&self, row: usize, col: &str) -> Result<CellRef<'_>> {
        let c = self.column_index(col)?;
        self.check_row(row)?;
        Ok(self.columns[c].store.cell(row))
    }

    /// A whole column: a `&[f64]` when every cell is a number.
    pub fn column(&self, name: &str) -> Result<ColumnRef<'_>> {
        let c = self.column_index(name)?;
        Ok(self.columns[c].store.as_ref())
    }

    /// The column at 0-based index `col`, with its name.
    pub fn column_at(&self, col: usize) -> Option<(&str, ColumnRef<'_>)> {
        self.columns
            .get(col)
            .map(|c| (c.name.as_str(), c.store.as_ref()))
    }

    /// A view of one 0-based row (access cells by name or column index).
    pub fn row(&self, row: usize) -> Result<RowView<'_>> {
        self.check_row(row)?;
        Ok(RowView {
            cols: &self.columns,
            deps: &[],
            row,
        })
    }

    /// Appends a data column. Its length must equal [`Sheet::nrows`], except
    /// on a sheet with no columns, where it sets the number of rows.
    pub fn add_column(&mut self, name: &str, data: impl Into<ColumnData>) -> Result<()> {
        let data = data.into();
        self.check_new_name(name)?;
        if !self.columns.is_empty() && data.len() != self.nrows {
            return Err(Error::Invalid(format!(
                "column \"{name}\" has {} values but the sheet has {} rows",
                data.len(),
                self.nrows
            )));
        }
        if let Some((row, message)) = data.defect() {
            return Err(cell_error(name, row, message));
        }
        self.nrows = data.len();
        self.columns.push(Column {
            name: name.to_string(),
            store: Store::from_data(data),
            formula: None,
        });
        Ok(())
    }

    /// Replaces every value of the data column `name` (one value per row)
    /// and recalculates the formula columns that depend on it.
    pub fn set_column<E: Evaluator + ?Sized>(
        &mut self,
        name: &str,
        data: impl Into<ColumnData>,
        ev: &mut E,
    ) -> Result<()> {
        let data = data.into();
        let c = self.column_index(name)?;
        self.check_data_column(c)?;
        if data.len() != self.nrows {
            return Err(Error::Invalid(format!(
                "column \"{name}\" needs {} values (one per row), got {}",
                self.nrows,
                data.len()
            )));
        }
        if let Some((row, message)) = data.defect() {
            return Err(cell_error(name, row, message));
        }
        let old = std::mem::replace(&mut self.columns[c].store, Store::from_data(data));
        let targets = graph::affected(&self.columns, &self.order, &[c]);
        if let Err(e) = self.recompute(&targets, Rows::All, ev) {
            self.columns[c].store = old;
            return Err(e);
        }
        Ok(())
    }

    /// Appends a row given one value per *data* column, in column order;
    /// formula cells of the new row are computed.
    pub fn add_row<E: Evaluator + ?Sized>(&mut self, values: Vec<Value>, ev: &mut E) -> Result<()> {
        let data_cols: Vec<usize> = (0..self.columns.len())
            .filter(|&c| self.columns[c].formula.is_none())
            .collect();
        if values.len() != data_cols.len() {
            let names: Vec<&str> = data_cols
                .iter()
                .map(|&c| self.columns[c].name.as_str())
                .collect();
            return Err(Error::Invalid(format!(
                "a row needs {} values, one per data column ({}), got {}",
                data_cols.len(),
                names.join(", "),
                values.len()
            )));
        }
        let mut row: Vec<Option<Value>> = vec![None; self.columns.len()];
        for (&c, v) in data_cols.iter().zip(values) {
            row[c] = Some(v);
        }
        self.push_row(row, ev)
    }

    /// Appends a row given as (column name, value) pairs. Data columns not
    /// named are left empty; naming a formula column, an unknown column or
    /// the same column twice is an error.
    pub fn add_row_named<K, I, E>(&mut self, values: I, ev: &mut E) -> Result<()>
    where
        K: AsRef<str>,
        I: IntoIterator<Item = (K, Value)>,
        E: Evaluator + ?Sized,
    {
        let mut row: Vec<Option<Value>> = vec![None; self.columns.len()];
        for (k, v) in values {
            let name = k.as_ref();
            let c = self.column_index(name)?;
            self.check_data_column(c)?;
            if row[c].is_some() {
                return Err(Error::Invalid(format!(
                    "column \"{name}\" is given twice in one row"
                )));
            }
            row[c] = Some(v);
        }
        for (c, cell) in row.iter_mut().enumerate() {
            if cell.is_none() && self.columns[c].formula.is_none() {
                *cell = Some(Value::Empty);
            }
        }
        self.push_row(row, ev)
    }

    /// Appends a row: `row[c]` is `Some` exactly for the data columns.
    fn push_row<E: Evaluator + ?Sized>(
        &mut self,
        row: Vec<Option<Value>>,
        ev: &mut E,
    ) -> Result<()> {
        let r = self.nrows;
        for (c, v) in row.iter().enumerate() {
            if let Some(message) = v.as_ref().and_then(Value::defect) {
                return Err(cell_error(&self.columns[c].name, r, message));
            }
        }
        for (c, v) in row.into_iter().enumerate() {
            if let Some(v) = v {
                self.columns[c].store.push(v);
            }
        }
        // Formula cells are pushed in dependency order, so every dependency
        // of a formula already has its cell in the new row.
        for i in 0..self.order.len() {
            let c = self.order[i];
            match self.eval_cell(c, r, ev) {
                Ok(v) => self.columns[c].store.push(v),
                Err(e) => {
                    for col in &mut self.columns {
                        col.store.truncate(r);
                    }
                    return Err(e);
                }
            }
        }
        self.nrows += 1;
        Ok(())
    }

    /// Makes `name` a formula column computed from `deps` (column names, in
    /// the order the evaluator will see them through [`RowView::dep`]) and
    /// computes it for every row, then every formula depending on it.
    ///
    /// A new name appends a column; an existing name is redefined (a data
    /// column becomes a formula column, its old values are replaced). A
    /// definition that would close a dependency cycle is refused with
    /// [`Error::Cycle`].
    pub fn add_formula<S: AsRef<str>, E: Evaluator + ?Sized>(
        &mut self,
        name: &str,
        deps: &[S],
        id: FormulaId,
        ev: &mut E,
    ) -> Result<()> {
        let mut dep_cols = Vec::with_capacity(deps.len());
        for d in deps {
            let d = d.as_ref();
            if d == name {
                return Err(Error::Cycle {
                    columns: vec![name.to_string(), name.to_string()],
                });
            }
            dep_cols.push(self.column_index(d)?);
        }
        let existing = self.columns.iter().position(|c| c.name == name);
        if existing.is_none() {
            self.check_new_name(name)?;
        }
        let formula = Formula { id, deps: dep_cols };
        let (col, old_formula) = match existing {
            Some(c) => (c, self.columns[c].formula.replace(formula)),
            None => {
                self.columns.push(Column {
                    name: name.to_string(),
                    store: Store::default(),
                    formula: Some(formula),
                });
                (self.columns.len() - 1, None)
            }
        };
        let result = match graph::dependency_order(&self.columns) {
            Err(cycle) => Err(Error::Cycle {
                columns: cycle
                    .iter()
                    .map(|&c| self.columns[c].name.clone())
                    .collect(),
            }),
            Ok(order) => {
                let old_order = std::mem::replace(&mut self.order, order);
                let targets = graph::affected(&self.columns, &self.order, &[col]);
                let r = self.recompute(&targets, Rows::All, ev);
                if r.is_err() {
                    self.order = old_order;
                }
                r
            }
        };
        if result.is_err() {
            match existing {
                Some(c) => self.columns[c].formula = old_formula,
                None => {
                    self.columns.pop();
                }
            }
        }
        result
    }

    /// Sets one cell of a data column, then recalculates, for that row only,
    /// exactly the formula columns that depend on the column (directly or
    /// through other formulas), in dependency order.
    pub fn set<E: Evaluator + ?Sized>(
        &mut self,
        row: usize,
        col: &str,
        value: Value,
        ev: &mut E,
    ) -> Result<()> {
        let c = self.column_index(col)?;
        self.check_row(row)?;
        self.check_data_column(c)?;
        if let Some(message) = value.defect() {
            return Err(cell_error(col, row, message));
        }
        let old = self.columns[c].store.cell(row).to_value();
        self.columns[c].store.set(row, value);
        let targets = graph::affected(&self.columns, &self.order, &[c]);
        if let Err(e) = self.recompute(&targets, Rows::One(row), ev) {
            self.columns[c].store.set(row, old);
            return Err(e);
        }
        Ok(())
    }

    /// Recomputes every formula column for every row, in dependency order.
    /// Progress goes to [`Evaluator::on_progress`] in cells.
    pub fn recalculate<E: Evaluator + ?Sized>(&mut self, ev: &mut E) -> Result<()> {
        let targets = self.order.clone();
        self.recompute(&targets, Rows::All, ev)
    }

    /// A new sheet with the rows for which `keep` returns `true`, in order.
    /// Formula columns stay formula columns (their values stay valid, since
    /// formulas read only their own row).
    pub fn filter<F>(&self, mut keep: F) -> Result<Sheet>
    where
        F: FnMut(RowView<'_>) -> Result<bool, String>,
    {
        let mut rows = Vec::new();
        for r in 0..self.nrows {
            let view = RowView {
                cols: &self.columns,
                deps: &[],
                row: r,
            };
            match keep(view) {
                Ok(true) => rows.push(r),
                Ok(false) => {}
                Err(m) => {
                    return Err(Error::Invalid(format!(
                        "filter condition failed at row {}: {m}",
                        r + 1
                    )))
                }
            }
        }
        Ok(self.gather(&rows))
    }

    /// A new sheet with the given 0-based rows, in the given order (a row
    /// may repeat).
    pub fn select_rows(&self, rows: &[usize]) -> Result<Sheet> {
        if let Some(&bad) = rows.iter().find(|&&r| r >= self.nrows) {
            self.check_row(bad)?;
        }
        Ok(self.gather(rows))
    }

    /// Sorts the rows by column `col`, stably (equal keys keep their order).
    ///
    /// Order rule: numbers first, then texts, then empty cells — in both
    /// directions. `ascending` orders numbers by value and texts by Unicode
    /// code point (no locale rules); `false` reverses each of those two
    /// groups, and empty cells stay last.
    pub fn sort(&mut self, col: &str, ascending: bool) -> Result<()> {
        let c = self.column_index(col)?;
        let key = &self.columns[c].store;
        let mut perm: Vec<usize> = (0..self.nrows).collect();
        perm.sort_by(|&a, &b| compare_cells(key.cell(a), key.cell(b), ascending));
        for column in &mut self.columns {
            column.store = column.store.select(&perm);
        }
        Ok(())
    }

    fn gather(&self, rows: &[usize]) -> Sheet {
        Sheet {
            columns: self
                .columns
                .iter()
                .map(|c| Column {
                    name: c.name.clone(),
                    store: c.store.select(rows),
                    formula: c.formula.clone(),
                })
                .collect(),
            nrows: rows.len(),
            order: self.order.clone(),
        }
    }

    /// Recomputes `targets` (formula columns in dependency order) over
    /// `rows`. On error every target is restored and the error returned.
    fn recompute<E: Evaluator + ?Sized>(
        &mut self,
        targets: &[usize],
        rows: Rows,
        ev: &mut E,
    ) -> Result<()> {
        match rows {
            Rows::One(r) => {
                let mut saved: Vec<(usize, Value)> = Vec::with_capacity(targets.len());
                for &c in targets {
                    match self.eval_cell(c, r, ev) {
                        Ok(v) => {
                            saved.push((c, self.columns[c].store.cell(r).to_value()));
                            self.columns[c].store.set(r, v);
                        }
                        Err(e) => {
                            for (c, old) in saved.into_iter().rev() {
                                self.columns[c].store.set(r, old);
                            }
                            return Err(e);
                        }
                    }
                }
            }
            Rows::All => {
                let total = targets.len() * self.nrows;
                let mut done = 0;
                let mut saved: Vec<(usize, Store)> = Vec::with_capacity(targets.len());
                for &c in targets {
                    match self.eval_column(c, ev, &mut done, total) {
                        Ok(store) => {
                            saved.push((c, std::mem::replace(&mut self.columns[c].store, store)))
                        }
                        Err(e) => {
                            for (c, old) in saved.into_iter().rev() {
                                self.columns[c].store = old;
                            }
                            return Err(e);
                        }
                    }
                }
            }
        }
        Ok(())
    }

    /// Evaluates formula column `c` at row `r` (which need not exist yet in
    /// column `c` itself).
    fn eval_cell<E: Evaluator + ?Sized>(&self, c: usize, r: usize, ev: &mut E) -> Result<Value> {
        let column = &self.columns[c];
        let Some(f) = &column.formula else {
            return Ok(column.store.cell(r).to_value());
        };
        let view = RowView {
            cols: &self.columns,
            deps: &f.deps,
            row: r,
        };
        let v = ev
            .eval_row(f.id, view)
            .map_err(|m| cell_error(&column.name, r, format!("formula failed: {m}")))?;
        match v.defect() {
            Some(m) => Err(cell_error(&column.name, r, format!("formula result: {m}"))),
            None => Ok(v),
        }
    }

    /// Evaluates formula column `c` over all rows into new storage.
    fn eval_column<E: Evaluator + ?Sized>(
        &self,
        c: usize,
        ev: &mut E,
        done: &mut usize,
        total: usize,
    ) -> Result<Store> {
        let column = &self.columns[c];
        let Some(f) = &column.formula else {
            return Ok(column.store.clone());
        };
        let n = self.nrows;
        let mut sink = ColumnSink::with_capacity(n);
        let mut start = 0;
        while start < n {
            let end = (start + CHUNK_ROWS).min(n);
            let view = RowsView {
                cols: &self.columns,
                deps: &f.deps,
                start,
                end,
            };
            ev.eval_rows(f.id, view, &mut sink).map_err(|e| {
                cell_error(
                    &column.name,
                    e.row,
                    format!("formula failed: {}", e.message),
                )
            })?;
            if sink.len() != end {
                return Err(cell_error(
                    &column.name,
                    start,
                    format!(
                        "the evaluator gave {} values for rows {} to {} (expected {})",
                        sink.len() - start.min(sink.len()),
                        start + 1,
                        end,
                        end - start
                    ),
                ));
            }
            *done += end - start;
            ev.on_progress(*done, total);
            start = end;
        }
        if let Some((r, x)) = sink.first_non_finite() {
            return Err(cell_error(
                &column.name,
                r,
                format!("formula result: value must be a finite number, got {x}"),
            ));
        }
        Ok(sink.into_store())
    }

    fn unknown(&self, name: &str) -> Error {
        Error::UnknownColumn {
            name: name.to_string(),
            columns: self.columns.iter().map(|c| c.name.clone()).collect(),
        }
    }

    fn check_row(&self, row: usize) -> Result<()> {
        if row < self.nrows {
            Ok(())
        } else {
            Err(Error::Invalid(format!(
                "row {} does not exist: the sheet has {} rows",
                row.saturating_add(1),
                self.nrows
            )))
        }
    }

    fn check_data_column(&self, c: usize) -> Result<()> {
        match self.columns[c].formula {
            None => Ok(()),
            Some(_) => Err(Error::Invalid(format!(
                "column \"{}\" is a formula column: its values are computed; \
                 change the columns it depends on, or redefine it",
                self.columns[c].name
            ))),
        }
    }

    fn check_new_name(&self, name: &str) -> Result<()> {
        if name.trim().is_empty() {
            return Err(Error::Invalid(format!(
                "column names must not be blank, got \"{name}\""
            )));
        }
        if self.has_column(name) {
            return Err(Error::Invalid(format!("column \"{name}\" already exists")));
        }
        Ok(())
    }

    /// Internal access for the I/O and rendering modules.
    pub(crate) fn columns(&self) -> &[Column] {
        &self.columns
    }
}

fn cell_error(column: &str, row: usize, message: String) -> Error {
    Error::Cell {
        column: column.to_string(),
        row,
        message,
    }
}

/// The sort rule of [`Sheet::sort`].
fn compare_cells(a: CellRef<'_>, b: CellRef<'_>, ascending: bool) -> Ordering {
    fn rank(c: &CellRef<'_>) -> u8 {
        match c {
            CellRef::Number(_) => 0,
            CellRef::Text(_) => 1,
            CellRef::Empty => 2,
        }
    }
    let within = match (a, b) {
        (CellRef::Number(x), CellRef::Number(y)) => x.partial_cmp(&y).unwrap_or(Ordering::Equal),
        (CellRef::Text(x), CellRef::Text(y)) => x.cmp(y),
        _ => return rank(&a).cmp(&rank(&b)),
    };
    if ascending {
        within
    } else {
        within.reverse()
    }
}
