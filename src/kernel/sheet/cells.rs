//! Cell values and column storage. A column is stored as a plain `Vec<f64>`
//! while every cell in it is a number, and as a `Vec<Value>` otherwise, so
//! numeric tables (the common case) cost eight bytes a cell and can be
//! handed out as `&[f64]` without copying.

use std::fmt;

/// One cell of a sheet.
///
/// Numbers are always finite: every way into a sheet rejects NaN and
/// infinities. An empty string is stored as [`Value::Empty`], so the two
/// cannot be told apart (they are written the same way to CSV anyway).
#[derive(Debug, Clone, PartialEq)]
pub enum Value {
    /// A finite number.
    Number(f64),
    /// A non-empty text.
    Text(String),
    /// No value.
    Empty,
}

impl Value {
    /// The number, if this is a number.
    pub fn as_number(&self) -> Option<f64> {
        match self {
            Value::Number(x) => Some(*x),
            _ => None,
        }
    }

    /// A borrowed view of this value.
    pub fn as_cell(&self) -> CellRef<'_> {
        match self {
            Value::Number(x) => CellRef::Number(*x),
            Value::Text(s) => CellRef::Text(s),
            Value::Empty => CellRef::Empty,
        }
    }

    /// Maps `Text("")` to `Empty`, the one stored form of "no value".
    pub(crate) fn normalized(self) -> Value {
        match self {
            Value::Text(s) if s.is_empty() => Value::Empty,
            v => v,
        }
    }

    /// The reason this value may not enter a sheet, if any.
    pub(crate) fn defect(&self) -> Option<String> {
        match self {
            Value::Number(x) if !x.is_finite() => {
                Some(format!("value must be a finite number, got {x}"))
            }
            _ => None,
        }
    }
}

impl From<f64> for Value {
    fn from(x: f64) -> Self {
        Value::Number(x)
    }
}

impl From<&str> for Value {
    fn from(s: &str) -> Self {
        Value::Text(s.to_string()).normalized()
    }
}

impl From<String> for Value {
    fn from(s: String) -> Self {
        Value::Text(s).normalized()
    }
}

impl From<Option<f64>> for Value {
    fn from(x: Option<f64>) -> Self {
        x.map_or(Value::Empty, Value::Number)
    }
}

impl fmt::Display for Value {
    /// Numbers in full round-trip precision, text as is, empty as nothing.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        self.as_cell().fmt(f)
    }
}

/// A borrowed cell: what a sheet hands out without copying text.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum CellRef<'a> {
    /// A finite number.
    Number(f64),
    /// A non-empty text.
    Text(&'a str),
    /// No value.
    Empty,
}

impl<'a> CellRef<'a> {
    /// The number, if this is a number.
    pub fn as_number(&self) -> Option<f64> {
        match self {
            CellRef::Number(x) => Some(*x),
            _ => None,
        }
    }

    /// The text, if this is a text.
    pub fn as_text(&self) -> Option<&'a str> {
        match self {
            CellRef::Text(s) => Some(s),
            _ => None,
        }
    }

    /// An owned copy.
    pub fn to_value(&self) -> Value {
        match self {
            CellRef::Number(x) => Value::Number(*x),
            CellRef::Text(s) => Value::Text((*s).to_string()),
            CellRef::Empty => Value::Empty,
        }
    }
}

impl fmt::Display for CellRef<'_> {
    /// Numbers in full round-trip precision, text as is, empty as nothing.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CellRef::Number(x) => write!(f, "{x}"),
            CellRef::Text(s) => f.write_str(s),
            CellRef::Empty => Ok(()),
        }
    }
}

/// A whole column, borrowed: `Numbers` exactly when every cell is a number
/// (a column with no rows counts as numeric).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ColumnRef<'a> {
    /// Every cell is a number.
    Numbers(&'a [f64]),
    /// At least one cell is text or empty.
    Values(&'a [Value]),
}

impl<'a> ColumnRef<'a> {
    /// Number of cells.
    pub fn len(&self) -> usize {
        match self {
            ColumnRef::Numbers(v) => v.len(),
            ColumnRef::Values(v) => v.len(),
        }
    }

    /// Whether the column has no cells.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The cell at a 0-based row, or `None` past the end.
    pub fn get(&self, row: usize) -> Option<CellRef<'a>> {
        match self {
            ColumnRef::Numbers(v) => v.get(row).map(|x| CellRef::Number(*x)),
            ColumnRef::Values(v) => v.get(row).map(Value::as_cell),
        }
    }

    /// The numbers, when every cell is a number.
    pub fn as_numbers(&self) -> Option<&'a [f64]> {
        match self {
            ColumnRef::Numbers(v) => Some(v),
            ColumnRef::Values(_) => None,
        }
    }
}

/// A whole column handed to a sheet by the caller.
#[derive(Debug, Clone, PartialEq)]
pub enum ColumnData {
    /// Numbers only (each must be finite).
    Numbers(Vec<f64>),
    /// Any values (numbers must be finite).
    Values(Vec<Value>),
}

impl ColumnData {
    /// Number of cells.
    pub fn len(&self) -> usize {
        match self {
            ColumnData::Numbers(v) => v.len(),
            ColumnData::Values(v) => v.len(),
        }
    }

    /// Whether there are no cells.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The first cell that may not enter a sheet: (0-based row, reason).
    pub(crate) fn defect(&self) -> Option<(usize, String)> {
        match self {
            ColumnData::Numbers(v) => v
                .iter()
                .position(|x| !x.is_finite())
                .map(|i| (i, format!("value must be a finite number, got {}", v[i]))),
            ColumnData::Values(v) => v
                .iter()
                .enumerate()
                .find_map(|(i, x)| x.defect().map(|m| (i, m))),
        }
    }
}

impl From<Vec<f64>> for ColumnData {
    fn from(v: Vec<f64>) -> Self {
        ColumnData::Numbers(v)
    }
}

impl From<Vec<Value>> for ColumnData {
    fn from(v: Vec<Value>) -> Self {
        ColumnData::Values(v)
    }
}

/// Column storage. Invariant: `Numbers` exactly when every cell is a
/// number, and `non_numbers` counts the text and empty cells of `Values`,
/// so the representation of a column is unique and `==` compares contents.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Store {
    Numbers(Vec<f64>),
    Values {
        cells: Vec<Value>,
        non_numbers: usize,
    },
}

impl Default for Store {
    fn default() -> Self {
        Store::Numbers(Vec::new())
    }
}

impl Store {
    /// Builds storage from checked data (finite numbers).
    pub(crate) fn from_data(data: ColumnData) -> Store {
        match data {
            ColumnData::Numbers(v) => Store::Numbers(v),
            ColumnData::Values(v) => Store::from_values(v),
        }
    }

    /// Builds storage from checked values, packing them when all are numbers.
    pub(crate) fn from_values(cells: Vec<Value>) -> Store {
        let cells: Vec<Value> = cells.into_iter().map(Value::normalized).collect();
        let non_numbers = cells
            .iter()
            .filter(|v| !matches!(v, Value::Number(_)))
            .count();
        let mut s = Store::Values { cells, non_numbers };
        s.pack_if_numeric();
        s
    }

    pub(crate) fn len(&self) -> usize {
        match self {
            Store::Numbers(v) => v.len(),
            Store::Values { cells, .. } => cells.len(),
        }
    }

    /// The cell at `row`; past the end reads as empty, so a view into a
    /// column that is still being built never panics.
    #[inline]
    pub(crate) fn cell(&self, row: usize) -> CellRef<'_> {
        match self {
            Store::Numbers(v) => v.get(row).map_or(CellRef::Empty, |x| CellRef::Number(*x)),
            Store::Values { cells, .. } => cells.get(row).map_or(CellRef::Empty, Value::as_cell),
        }
    }

    pub(crate) fn as_ref(&self) -> ColumnRef<'_> {
        match self {
            Store::Numbers(v) => ColumnRef::Numbers(v),
            Store::Values { cells, .. } => ColumnRef::Values(cells),
        }
    }

    fn unpack(&mut self) {
        if let Store::Numbers(v) = self {
            let cells = std::mem::take(v).into_iter().map(Value::Number).collect();
            *self = Store::Values {
                cells,
                non_numbers: 0,
            };
        }
    }

    fn pack_if_numeric(&mut self) {
        if let Store::Values {
            cells,
            non_numbers: 0,
        } = self
        {
            let v = std::mem::take(cells)
                .into_iter()
                .map(|c| c.as_number().unwrap_or(0.0))
                .collect();
            *self = Store::Numbers(v);
        }
    }

    /// Appends a checked value.
    pub(crate) fn push(&mut self, v: Value) {
        let v = v.normalized();
        match (&mut *self, v) {
            (Store::Numbers(xs), Value::Number(x)) => xs.push(x),
            (Store::Values { cells, .. }, v @ Value::Number(_)) => cells.push(v),
            (_, v) => {
                self.unpack();
                if let Store::Values { cells, non_numbers } = self {
                    cells.push(v);
                    *non_numbers += 1;
                }
            }
        }
    }

    /// Replaces the cell at `row` (< len) with a checked value.
    pub(crate) fn set(&mut self, row: usize, v: Value) {
        let v = v.normalized();
        match (&mut *self, v) {
            (Store::Numbers(xs), Value::Number(x)) => xs[row] = x,
            (Store::Numbers(_), v) => {
                self.unpack();
                self.set(row, v);
            }
            (Store::Values { cells, non_numbers }, v) => {
                let was_number = matches!(cells[row], Value::Number(_));
                let is_number = matches!(v, Value::Number(_));
                cells[row] = v;
                match (was_number, is_number) {
                    (true, false) => *non_numbers += 1,
                    (false, true) => {
                        *non_numbers -= 1;
                        self.pack_if_numeric();
                    }
                    _ => {}
                }
            }
        }
    }

    /// Drops the cells from `len` on.
    pub(crate) fn truncate(&mut self, len: usize) {
        match self {
            Store::Numbers(v) => v.truncate(len),
            Store::Values { cells, non_numbers } => {
                let dropped = cells[len.min(cells.len())..]
                    .iter()
                    .filter(|v| !matches!(v, Value::Number(_)))
                    .count();
                cells.truncate(len);
                *non_numbers -= dropped;
                self.pack_if_numeric();
            }
        }
    }

    /// The cells at the given rows, in that order.
    pub(crate) fn select(&self, rows: &[usize]) -> Store {
        match self {
            Store::Numbers(v) => Store::Numbers(rows.iter().map(|&i| v[i]).collect()),
            Store::Values { cells, .. } => {
                Store::from_values(rows.iter().map(|&i| cells[i].clone()).collect())
            }
        }
    }
}

/// Collects one formula column while it is evaluated: numbers go into a
/// `Vec<f64>` until the first text or empty result, so a numeric formula
/// column allocates nothing per cell.
#[derive(Debug, Default)]
pub struct ColumnSink {
    store: Store,
}

impl ColumnSink {
    pub(crate) fn with_capacity(n: usize) -> Self {
        ColumnSink {
            store: Store::Numbers(Vec::with_capacity(n)),
        }
    }

    /// Appends the value of the next row. Non-finite numbers are accepted
    /// here and rejected, with their row, when the column is committed.
    #[inline]
    pub fn push(&mut self, v: Value) {
        match (&mut self.store, v) {
            (Store::Numbers(xs), Value::Number(x)) => xs.push(x),
            (_, v) => self.store.push(v),
        }
    }

    /// Appends a number (the fast path for numeric formulas).
    #[inline]
    pub fn push_number(&mut self, x: f64) {
        match &mut self.store {
            Store::Numbers(xs) => xs.push(x),
            Store::Values { cells, .. } => cells.push(Value::Number(x)),
        }
    }

    /// Number of values pushed so far.
    pub fn len(&self) -> usize {
        self.store.len()
    }

    /// Whether nothing was pushed yet.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The first non-finite number: (0-based index, value).
    pub(crate) fn first_non_finite(&self) -> Option<(usize, f64)> {
        match &self.store {
            Store::Numbers(v) => v.iter().position(|x| !x.is_finite()).map(|i| (i, v[i])),
            Store::Values { cells, .. } => cells.iter().enumerate().find_map(|(i, c)| match c {
                Value::Number(x) if !x.is_finite() => Some((i, *x)),
                _ => None,
            }),
        }
    }

    pub(crate) fn into_store(self) -> Store {
        self.store
    }
}
