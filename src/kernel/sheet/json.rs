//! Sheets as JSON, for programs that read tables by column name. Two
//! layouts: an array of row objects (`[{"abv": 40, "t": 20}, …]`, the
//! default, convenient for records) or one object of column arrays
//! (`{"abv": [40, …], "t": [20, …]}`, compact for long numeric tables).
//! Keys keep the sheet's column order; numbers are JSON numbers (shortest
//! round-trip form), texts strings, empty cells `null`.

use std::io::{BufWriter, Write};

use serde::ser::{Serialize, SerializeMap, SerializeSeq, Serializer};

use super::{CellRef, Column, Sheet};
use crate::kernel::error::{Error, Result};

/// The shape of [`Sheet::write_json`] output.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum JsonLayout {
    /// An array with one object per row, keys in column order.
    #[default]
    Rows,
    /// One object with one array per column, in column order.
    Columns,
}

impl Sheet {
    /// Writes the sheet as one JSON document followed by a newline.
    pub fn write_json<W: Write>(&self, writer: W, layout: JsonLayout) -> Result<()> {
        let mut w = BufWriter::new(writer);
        let result = match layout {
            JsonLayout::Rows => serde_json::to_writer(&mut w, &RowsJson(self)),
            JsonLayout::Columns => serde_json::to_writer(&mut w, &ColumnsJson(self)),
        };
        result.map_err(|e| match e.io_error_kind() {
            Some(kind) => Error::Io {
                kind,
                message: e.to_string(),
            },
            None => Error::Invalid(format!("json: {e}")),
        })?;
        w.write_all(b"\n")?;
        w.flush()?;
        Ok(())
    }
}

struct CellJson<'a>(CellRef<'a>);

impl Serialize for CellJson<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        match self.0 {
            CellRef::Number(x) => s.serialize_f64(x),
            CellRef::Text(t) => s.serialize_str(t),
            CellRef::Empty => s.serialize_unit(),
        }
    }
}

struct RowJson<'a> {
    cols: &'a [Column],
    row: usize,
}

impl Serialize for RowJson<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        let mut m = s.serialize_map(Some(self.cols.len()))?;
        for c in self.cols {
            m.serialize_entry(&c.name, &CellJson(c.store.cell(self.row)))?;
        }
        m.end()
    }
}

struct RowsJson<'a>(&'a Sheet);

impl Serialize for RowsJson<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        let cols = self.0.columns();
        let mut seq = s.serialize_seq(Some(self.0.nrows()))?;
        for row in 0..self.0.nrows() {
            seq.serialize_element(&RowJson { cols, row })?;
        }
        seq.end()
    }
}

struct ColumnJson<'a>(&'a Column);

impl Serialize for ColumnJson<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        let n = self.0.store.len();
        let mut seq = s.serialize_seq(Some(n))?;
        for row in 0..n {
            seq.serialize_element(&CellJson(self.0.store.cell(row)))?;
        }
        seq.end()
    }
}

struct ColumnsJson<'a>(&'a Sheet);

impl Serialize for ColumnsJson<'_> {
    fn serialize<S: Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        let cols = self.0.columns();
        let mut m = s.serialize_map(Some(cols.len()))?;
        for c in cols {
            m.serialize_entry(&c.name, &ColumnJson(c))?;
        }
        m.end()
    }
}
