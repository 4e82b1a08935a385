//! Sheets: formula recalculation order and scope, cycles, row operations,
//! two-way tables, CSV/JSON input and output, text rendering, and the
//! atomic file writer.

use meniscus::kernel::sheet::{
    CellRef, ColumnData, ColumnRef, ColumnSink, CsvOptions, EvalError, Evaluator, FormulaId, Grid,
    JsonLayout, NoFormulas, RenderOptions, RowView, RowsView, Sheet, Value, CHUNK_ROWS,
};
use meniscus::kernel::Error;
use proptest::prelude::*;

// ------------------------------------------------------------ evaluators

/// Formulas of the tests, by id, over the numeric dependencies in order.
fn apply(id: u64, d: &[f64]) -> Result<f64, String> {
    Ok(match id {
        1 => d[0] * 2.0,
        2 => d[0] + 1.0,
        3 => d[0] * d[1],
        4 => d[0] - 1.0,
        5 => d.iter().sum(),
        6 => {
            if d[0] < 0.0 {
                return Err(format!("negative input {}", d[0]));
            }
            d[0].sqrt()
        }
        7 => d[0] / 0.0 * 0.0, // NaN
        other => return Err(format!("no formula {other}")),
    })
}

/// Records every call, so tests can count and order evaluations.
#[derive(Default)]
struct Log {
    calls: Vec<(u64, usize)>,
    progress: Vec<(usize, usize)>,
}

impl Evaluator for Log {
    fn eval_row(&mut self, f: FormulaId, row: RowView<'_>) -> Result<Value, String> {
        self.calls.push((f.0, row.index()));
        let mut d = Vec::new();
        for k in 0..row.dep_count() {
            d.push(
                row.dep_number(k)
                    .ok_or_else(|| format!("{} is not a number", row.dep_name(k).unwrap()))?,
            );
        }
        apply(f.0, &d).map(Value::Number)
    }

    fn on_progress(&mut self, done: usize, total: usize) {
        self.progress.push((done, total));
    }
}

impl Log {
    fn ids(&self) -> Vec<u64> {
        self.calls.iter().map(|c| c.0).collect()
    }
}

fn num(s: &Sheet, row: usize, col: &str) -> f64 {
    s.get(row, col).unwrap().as_number().unwrap()
}

fn xs(s: &Sheet, col: &str) -> Vec<f64> {
    s.column(col).unwrap().as_numbers().unwrap().to_vec()
}

fn data(cols: &[(&str, Vec<f64>)]) -> Sheet {
    Sheet::from_columns(
        cols.iter()
            .map(|(n, v)| (*n, ColumnData::Numbers(v.clone())))
            .collect(),
    )
    .unwrap()
}

// ------------------------------------------------------------ recalculation

#[test]
fn chain_is_computed_in_order_and_set_recalculates_only_its_row() {
    let mut s = data(&[("x", vec![1.0, 2.0, 3.0]), ("y", vec![0.0; 3])]);
    let mut ev = Log::default();
    s.add_formula("a", &["x"], FormulaId(1), &mut ev).unwrap(); // a = 2x
    s.add_formula("b", &["a"], FormulaId(2), &mut ev).unwrap(); // b = a + 1
    s.add_formula("c", &["b"], FormulaId(1), &mut ev).unwrap(); // c = 2b
    s.add_formula("u", &["y"], FormulaId(4), &mut ev).unwrap(); // u = y - 1
    assert_eq!(xs(&s, "c"), vec![6.0, 10.0, 14.0]);

    ev.calls.clear();
    s.set(1, "x", Value::Number(10.0), &mut ev).unwrap();
    // Exactly a, b, c for row 1, in dependency order; u untouched.
    assert_eq!(ev.calls, vec![(1, 1), (2, 1), (1, 1)]);
    assert_eq!(num(&s, 1, "a"), 20.0);
    assert_eq!(num(&s, 1, "b"), 21.0);
    assert_eq!(num(&s, 1, "c"), 42.0);
    assert_eq!(xs(&s, "c"), vec![6.0, 42.0, 14.0]);

    ev.calls.clear();
    s.set(2, "y", Value::Number(5.0), &mut ev).unwrap();
    assert_eq!(ev.calls, vec![(4, 2)]);
    assert_eq!(num(&s, 2, "u"), 4.0);
}

#[test]
fn diamond_evaluates_both_branches_before_the_join() {
    let mut s = data(&[("x", vec![1.0, 2.0]), ("y", vec![7.0, 8.0])]);
    let mut ev = Log::default();
    s.add_formula("p", &["x"], FormulaId(2), &mut ev).unwrap(); // x + 1
    s.add_formula("q", &["x"], FormulaId(1), &mut ev).unwrap(); // 2x
    s.add_formula("r", &["p", "q"], FormulaId(3), &mut ev)
        .unwrap(); // p q
    s.add_formula("v", &["y"], FormulaId(4), &mut ev).unwrap();
    assert_eq!(xs(&s, "r"), vec![4.0, 12.0]);

    ev.calls.clear();
    s.set(0, "x", Value::Number(3.0), &mut ev).unwrap();
    assert_eq!(ev.calls.len(), 3, "p, q and r once each: {:?}", ev.calls);
    assert_eq!(ev.ids()[2], 3, "the join comes last");
    assert_eq!(num(&s, 0, "r"), 4.0 * 6.0);
    assert_eq!(num(&s, 1, "r"), 12.0, "other rows untouched");
}

#[test]
fn full_recalculation_follows_dependencies_not_column_order() {
    // `early` sits left of `late` but is redefined to depend on it.
    let mut s = data(&[("x", vec![1.0, 2.0]), ("early", vec![0.0, 0.0])]);
    let mut ev = Log::default();
    s.add_formula("late", &["x"], FormulaId(2), &mut ev)
        .unwrap();
    s.add_formula("early", &["late"], FormulaId(1), &mut ev)
        .unwrap();
    assert_eq!(xs(&s, "early"), vec![4.0, 6.0]);
    assert_eq!(s.formula("early").unwrap().unwrap().deps, vec!["late"]);

    ev.calls.clear();
    s.recalculate(&mut ev).unwrap();
    assert_eq!(ev.calls, vec![(2, 0), (2, 1), (1, 0), (1, 1)]);

    ev.calls.clear();
    s.set(1, "x", Value::Number(10.0), &mut ev).unwrap();
    assert_eq!(ev.calls, vec![(2, 1), (1, 1)]);
    assert_eq!(num(&s, 1, "early"), 22.0);
}

#[test]
fn redefining_a_formula_recomputes_its_dependents() {
    let mut s = data(&[("x", vec![1.0, 2.0])]);
    let mut ev = Log::default();
    s.add_formula("a", &["x"], FormulaId(1), &mut ev).unwrap();
    s.add_formula("b", &["a"], FormulaId(2), &mut ev).unwrap();
    s.add_formula("a", &["x"], FormulaId(4), &mut ev).unwrap(); // a = x - 1
    assert_eq!(xs(&s, "a"), vec![0.0, 1.0]);
    assert_eq!(xs(&s, "b"), vec![1.0, 2.0]);
    assert_eq!(s.column_names(), vec!["x", "a", "b"]);
}

#[test]
fn direct_cycle_names_the_column() {
    let mut s = data(&[("x", vec![1.0])]);
    let e = s
        .add_formula("x", &["x"], FormulaId(1), &mut NoFormulas)
        .unwrap_err();
    assert_eq!(
        e,
        Error::Cycle {
            columns: vec!["x".into(), "x".into()]
        }
    );
    assert_eq!(e.to_string(), "formula columns form a cycle: x → x");
    let e = s
        .add_formula("new", &["x", "new"], FormulaId(1), &mut NoFormulas)
        .unwrap_err();
    assert!(e.to_string().contains("new → new"), "{e}");
    assert_eq!(s.column_names(), vec!["x"]);
}

#[test]
fn indirect_cycle_names_the_columns_in_order_and_changes_nothing() {
    let mut s = data(&[("x", vec![1.0, 2.0])]);
    let mut ev = Log::default();
    s.add_formula("a", &["x"], FormulaId(2), &mut ev).unwrap();
    s.add_formula("b", &["a"], FormulaId(2), &mut ev).unwrap();
    s.add_formula("c", &["b"], FormulaId(2), &mut ev).unwrap();
    let before = s.clone();
    let e = s
        .add_formula("a", &["c"], FormulaId(2), &mut ev)
        .unwrap_err();
    assert_eq!(e.to_string(), "formula columns form a cycle: a → b → c → a");
    assert_eq!(s, before);
    // Still fully working afterwards.
    s.set(0, "x", Value::Number(5.0), &mut ev).unwrap();
    assert_eq!(num(&s, 0, "c"), 8.0);
}

#[test]
fn unknown_columns_are_named_with_the_columns_that_exist() {
    let mut s = data(&[("abv", vec![40.0]), ("t", vec![20.0])]);
    let e = s.get(0, "temp").unwrap_err();
    assert_eq!(
        e.to_string(),
        "unknown column \"temp\"; the columns are: \"abv\", \"t\""
    );
    assert!(matches!(
        s.add_formula("r", &["rho"], FormulaId(1), &mut NoFormulas),
        Err(Error::UnknownColumn { ref name, .. }) if name == "rho"
    ));
    assert!(s.column("x").is_err());
    assert!(s.set(0, "x", Value::Empty, &mut NoFormulas).is_err());
    assert!(s.sort("x", true).is_err());
    assert_eq!(s.ncols(), 2);
}

#[test]
fn a_failing_formula_names_column_and_row_and_changes_nothing() {
    let mut s = data(&[("x", vec![4.0, 9.0, 16.0])]);
    let mut ev = Log::default();
    s.add_formula("r", &["x"], FormulaId(6), &mut ev).unwrap(); // sqrt
    s.add_formula("r2", &["r"], FormulaId(2), &mut ev).unwrap();
    let before = s.clone();

    let e = s.set(2, "x", Value::Number(-1.0), &mut ev).unwrap_err();
    assert_eq!(
        e.to_string(),
        "column \"r\", row 3: formula failed: negative input -1"
    );
    assert_eq!(s, before);

    let e = s
        .set_column("x", vec![1.0, -4.0, 9.0], &mut ev)
        .unwrap_err();
    assert!(
        matches!(e, Error::Cell { ref column, row: 1, .. } if column == "r"),
        "{e}"
    );
    assert_eq!(s, before);

    let e = s.add_row(vec![Value::Number(-2.0)], &mut ev).unwrap_err();
    assert!(e.to_string().contains("row 4"), "{e}");
    assert_eq!(s, before);

    // Redefining a data column as a failing formula keeps its data.
    let e = s
        .add_formula("x", &[] as &[&str], FormulaId(99), &mut ev)
        .unwrap_err();
    assert!(e.to_string().contains("no formula 99"), "{e}");
    assert_eq!(s, before);

    let e = s
        .add_formula("n", &["x"], FormulaId(7), &mut ev)
        .unwrap_err();
    assert!(e.to_string().contains("finite"), "{e}");
    assert_eq!(s, before);
}

#[test]
fn formula_columns_cannot_be_set_by_hand() {
    let mut s = data(&[("x", vec![1.0])]);
    let mut ev = Log::default();
    s.add_formula("a", &["x"], FormulaId(1), &mut ev).unwrap();
    let e = s.set(0, "a", Value::Number(3.0), &mut ev).unwrap_err();
    assert!(e.to_string().contains("is a formula column"), "{e}");
    assert!(s.set_column("a", vec![1.0], &mut ev).is_err());
    assert!(s
        .add_row_named([("a", Value::Number(1.0))], &mut ev)
        .is_err());
}

#[test]
fn rows_are_added_in_order_or_by_name() {
    let mut s = Sheet::new(&["abv", "lot"]).unwrap();
    let mut ev = Log::default();
    s.add_formula("double", &["abv"], FormulaId(1), &mut ev)
        .unwrap();
    s.add_row(vec![40.0.into(), "A-1".into()], &mut ev).unwrap();
    s.add_row_named([("lot", Value::from("B-2")), ("abv", 45.5.into())], &mut ev)
        .unwrap();
    s.add_row_named([("abv", Value::from(12.0))], &mut ev)
        .unwrap();
    assert_eq!(s.nrows(), 3);
    assert_eq!(xs(&s, "double"), vec![80.0, 91.0, 24.0]);
    assert_eq!(s.get(1, "lot").unwrap(), CellRef::Text("B-2"));
    assert_eq!(s.get(2, "lot").unwrap(), CellRef::Empty);

    let e = s.add_row(vec![1.0.into()], &mut ev).unwrap_err();
    assert!(
        e.to_string().contains("one per data column (abv, lot)"),
        "{e}"
    );
    let e = s
        .add_row(vec![f64::NAN.into(), Value::Empty], &mut ev)
        .unwrap_err();
    assert_eq!(
        e.to_string(),
        "column \"abv\", row 4: value must be a finite number, got NaN"
    );
    assert!(s
        .add_row_named(
            [("abv", Value::from(1.0)), ("abv", Value::from(2.0))],
            &mut ev
        )
        .is_err());
    assert!(s
        .add_row_named([("proof", Value::from(1.0))], &mut ev)
        .is_err());
    assert_eq!(s.nrows(), 3);
    assert!(s.get(3, "abv").is_err());
}

#[test]
fn a_column_is_a_slice_of_numbers_exactly_while_all_cells_are_numbers() {
    let mut s = data(&[("x", vec![1.0, 2.0, 3.0])]);
    assert_eq!(s.column("x").unwrap(), ColumnRef::Numbers(&[1.0, 2.0, 3.0]));
    s.set(1, "x", "n/a".into(), &mut NoFormulas).unwrap();
    assert!(
        matches!(s.column("x").unwrap(), ColumnRef::Values(v) if v[1] == Value::Text("n/a".into()))
    );
    s.set(1, "x", Value::Number(2.5), &mut NoFormulas).unwrap();
    assert_eq!(s.column("x").unwrap(), ColumnRef::Numbers(&[1.0, 2.5, 3.0]));
    s.set(0, "x", Value::Text(String::new()), &mut NoFormulas)
        .unwrap();
    assert_eq!(
        s.get(0, "x").unwrap(),
        CellRef::Empty,
        "empty text is empty"
    );
    assert!(s
        .set(0, "x", f64::INFINITY.into(), &mut NoFormulas)
        .is_err());
}

#[test]
fn text_results_and_text_inputs_flow_through_formulas() {
    let mut s = Sheet::from_columns(vec![(
        "lot",
        ColumnData::Values(vec!["a".into(), Value::Empty, "ccc".into()]),
    )])
    .unwrap();
    let mut len = |_: FormulaId, row: RowView<'_>| -> Result<Value, String> {
        Ok(match row.dep(0) {
            CellRef::Text(t) => Value::Number(t.len() as f64),
            _ => Value::Text("none".into()),
        })
    };
    s.add_formula("n", &["lot"], FormulaId(0), &mut len)
        .unwrap();
    assert_eq!(s.get(0, "n").unwrap(), CellRef::Number(1.0));
    assert_eq!(s.get(1, "n").unwrap(), CellRef::Text("none"));
    s.set(1, "lot", "bb".into(), &mut len).unwrap();
    assert_eq!(s.column("n").unwrap(), ColumnRef::Numbers(&[1.0, 2.0, 3.0]));
}

#[test]
fn progress_is_reported_in_cells_per_chunk() {
    let n = 2 * CHUNK_ROWS + 5;
    let mut s = data(&[("x", (0..n).map(|i| i as f64).collect())]);
    let mut ev = Log::default();
    s.add_formula("a", &["x"], FormulaId(1), &mut ev).unwrap();
    assert_eq!(
        ev.progress,
        vec![(CHUNK_ROWS, n), (2 * CHUNK_ROWS, n), (n, n)]
    );
    s.add_formula("b", &["a"], FormulaId(2), &mut ev).unwrap();
    ev.progress.clear();
    s.recalculate(&mut ev).unwrap();
    assert_eq!(ev.progress.len(), 6);
    assert_eq!(*ev.progress.last().unwrap(), (2 * n, 2 * n));
    assert!(ev.progress.windows(2).all(|w| w[0].0 < w[1].0));
}

/// Evaluates whole chunks from the dependency slices, as a binding would.
struct Columnwise {
    chunks: usize,
    short: bool,
}

impl Evaluator for Columnwise {
    fn eval_row(&mut self, _f: FormulaId, row: RowView<'_>) -> Result<Value, String> {
        Ok(Value::Number(row.dep_number(0).unwrap_or(0.0) * 3.0))
    }

    fn eval_rows(
        &mut self,
        _f: FormulaId,
        rows: RowsView<'_>,
        out: &mut ColumnSink,
    ) -> Result<(), EvalError> {
        self.chunks += 1;
        let x = rows
            .dep_column(0)
            .and_then(|c| c.as_numbers())
            .ok_or(EvalError {
                row: rows.range().start,
                message: "x is not numeric".into(),
            })?;
        let range = rows.range();
        let end = if self.short { range.end - 1 } else { range.end };
        for &v in &x[range.start..end] {
            out.push_number(v * 3.0);
        }
        Ok(())
    }
}

#[test]
fn a_columnwise_evaluator_is_called_once_per_chunk() {
    let n = CHUNK_ROWS + 10;
    let mut s = data(&[("x", (0..n).map(|i| i as f64).collect())]);
    let mut ev = Columnwise {
        chunks: 0,
        short: false,
    };
    s.add_formula("y", &["x"], FormulaId(0), &mut ev).unwrap();
    assert_eq!(ev.chunks, 2);
    assert_eq!(num(&s, n - 1, "y"), 3.0 * (n - 1) as f64);
    // Single-row work goes through eval_row.
    s.set(3, "x", Value::Number(1.5), &mut ev).unwrap();
    assert_eq!(ev.chunks, 2);
    assert_eq!(num(&s, 3, "y"), 4.5);

    let before = s.clone();
    ev.short = true;
    let e = s.recalculate(&mut ev).unwrap_err();
    assert!(e.to_string().contains("the evaluator gave"), "{e}");
    assert_eq!(s, before);
}

// ------------------------------------------------------------ filter, sort

#[test]
fn filter_keeps_formulas_alive() {
    let mut s = data(&[("x", vec![1.0, 2.0, 3.0, 4.0])]);
    let mut ev = Log::default();
    s.add_formula("y", &["x"], FormulaId(1), &mut ev).unwrap();
    let mut f = s
        .filter(|r| Ok(r.get("y").and_then(|c| c.as_number()).unwrap() > 3.0))
        .unwrap();
    assert_eq!(xs(&f, "x"), vec![2.0, 3.0, 4.0]);
    assert_eq!(xs(&f, "y"), vec![4.0, 6.0, 8.0]);
    assert!(f.formula("y").unwrap().is_some());
    f.set(0, "x", Value::Number(10.0), &mut ev).unwrap();
    assert_eq!(num(&f, 0, "y"), 20.0);
    assert_eq!(xs(&s, "x"), vec![1.0, 2.0, 3.0, 4.0], "original untouched");

    let e = s.filter(|_| Err("boom".into())).unwrap_err();
    assert_eq!(e.to_string(), "filter condition failed at row 1: boom");
    assert_eq!(s.filter(|_| Ok(false)).unwrap().nrows(), 0);
}

#[test]
fn sort_is_stable_numbers_then_text_then_empty() {
    let key = vec![
        Value::from(3.0),
        Value::from("b"),
        Value::Empty,
        Value::from(1.0),
        Value::from("a"),
        Value::from(3.0),
        Value::from(-2.0),
    ];
    let tag: Vec<f64> = (0..key.len()).map(|i| i as f64).collect();
    let mut s = Sheet::from_columns(vec![
        ("k", ColumnData::Values(key)),
        ("tag", ColumnData::Numbers(tag)),
    ])
    .unwrap();
    let mut ev = Log::default();
    s.add_formula("t2", &["tag"], FormulaId(1), &mut ev)
        .unwrap();

    s.sort("k", true).unwrap();
    assert_eq!(xs(&s, "tag"), vec![6.0, 3.0, 0.0, 5.0, 4.0, 1.0, 2.0]);
    // Formula cells moved with their rows.
    assert_eq!(xs(&s, "t2"), vec![12.0, 6.0, 0.0, 10.0, 8.0, 2.0, 4.0]);

    s.sort("k", false).unwrap();
    // 3.0 (tags 0, 5 in their current order), 1, -2, then "b", "a", empty.
    assert_eq!(xs(&s, "tag"), vec![0.0, 5.0, 3.0, 6.0, 1.0, 4.0, 2.0]);

    s.sort("tag", true).unwrap();
    assert_eq!(xs(&s, "tag"), (0..7).map(|i| i as f64).collect::<Vec<_>>());
}

#[test]
fn select_rows_checks_bounds() {
    let s = data(&[("x", vec![1.0, 2.0, 3.0])]);
    assert_eq!(
        xs(&s.select_rows(&[2, 0, 2]).unwrap(), "x"),
        vec![3.0, 1.0, 3.0]
    );
    let e = s.select_rows(&[0, 3]).unwrap_err();
    assert_eq!(e.to_string(), "row 4 does not exist: the sheet has 3 rows");
}

// ------------------------------------------------------------ grid

#[test]
fn grid_long_and_wide() {
    let g = Grid {
        row_name: "abv",
        row_values: &[10.0, 20.0, 30.0],
        col_name: "t",
        col_values: &[15.0, 20.5],
    };
    let f = |r: f64, c: f64| Ok(r * 100.0 + c);
    let mut progress = Vec::new();
    let long = g.long("v", f, &mut |d, t| progress.push((d, t))).unwrap();
    assert_eq!(long.column_names(), vec!["abv", "t", "v"]);
    assert_eq!(xs(&long, "abv"), vec![10.0, 10.0, 20.0, 20.0, 30.0, 30.0]);
    assert_eq!(xs(&long, "t"), vec![15.0, 20.5, 15.0, 20.5, 15.0, 20.5]);
    assert_eq!(
        xs(&long, "v"),
        vec![1015.0, 1020.5, 2015.0, 2020.5, 3015.0, 3020.5]
    );
    assert_eq!(progress, vec![(2, 6), (4, 6), (6, 6)]);

    let wide = g.wide(f, &mut |_, _| {}).unwrap();
    assert_eq!(wide.column_names(), vec!["abv", "t=15", "t=20.5"]);
    assert_eq!(xs(&wide, "t=20.5"), vec![1020.5, 2020.5, 3020.5]);
    assert_eq!(xs(&wide, "abv"), vec![10.0, 20.0, 30.0]);
}

#[test]
fn grid_errors_name_the_point() {
    let g = Grid {
        row_name: "abv",
        row_values: &[10.0, 96.0],
        col_name: "t",
        col_values: &[20.0],
    };
    let e = g
        .long(
            "rho",
            |r, _| {
                if r > 90.0 {
                    Err("out of range".into())
                } else {
                    Ok(r)
                }
            },
            &mut |_, _| {},
        )
        .unwrap_err();
    assert_eq!(
        e.to_string(),
        "table value at abv = 96, t = 20 failed: out of range"
    );
    let e = g.wide(|_, _| Ok(f64::NAN), &mut |_, _| {}).unwrap_err();
    assert!(e.to_string().contains("finite"), "{e}");
    let dup = Grid {
        col_values: &[20.0, 20.0],
        ..g
    };
    assert!(dup.wide(|_, _| Ok(1.0), &mut |_, _| {}).is_err());
}

#[test]
fn grid_with_gaps_leaves_empty_cells() {
    let g = Grid {
        row_name: "abv",
        row_values: &[10.0, 96.0],
        col_name: "t",
        col_values: &[0.0, 20.0],
    };
    // No value where the row value is above 90 and the column value below 10.
    let f = |r: f64, c: f64| Ok((r <= 90.0 || c >= 10.0).then_some(r + c));
    let long = g.long_partial("v", f, &mut |_, _| {}).unwrap();
    assert_eq!(long.get(2, "v").unwrap(), CellRef::Empty);
    assert_eq!(long.get(3, "v").unwrap(), CellRef::Number(116.0));
    let wide = g.wide_partial(f, &mut |_, _| {}).unwrap();
    assert_eq!(wide.get(1, "t=0").unwrap(), CellRef::Empty);
    // Without gaps the value columns stay numeric.
    assert!(wide.column("t=20").unwrap().as_numbers().is_some());
    let full = g.long_partial("v", |r, c| Ok(Some(r * c)), &mut |_, _| {});
    assert!(full.unwrap().column("v").unwrap().as_numbers().is_some());
    // Errors still stop the build.
    let e = g
        .wide_partial(|_, _| Err("boom".into()), &mut |_, _| {})
        .unwrap_err();
    assert_eq!(e.to_string(), "table value at abv = 10, t = 0 failed: boom");
}

// ------------------------------------------------------------ CSV: output

fn to_csv(s: &Sheet) -> String {
    let mut out = Vec::new();
    s.write_csv(&mut out, &CsvOptions::default()).unwrap();
    String::from_utf8(out).unwrap()
}

fn from_csv(text: &str) -> Result<Sheet, Error> {
    Sheet::read_csv(text.as_bytes(), &CsvOptions::default())
}

#[test]
fn csv_output_uses_shortest_round_trip_numbers_and_quotes_when_needed() {
    let s = Sheet::from_columns(vec![
        ("x", ColumnData::Numbers(vec![0.1 + 0.2, 1.0, -2.5e-7])),
        (
            "note",
            ColumnData::Values(vec!["a,b".into(), "say \"hi\"".into(), Value::Empty]),
        ),
    ])
    .unwrap();
    assert_eq!(
        to_csv(&s),
        "x,note\n0.30000000000000004,\"a,b\"\n1,\"say \"\"hi\"\"\"\n-0.00000025,\n"
    );
    assert_eq!(from_csv(&to_csv(&s)).unwrap(), s);
}

#[test]
fn a_one_column_sheet_with_empty_cells_round_trips() {
    let s = Sheet::from_columns(vec![(
        "lot",
        ColumnData::Values(vec!["a".into(), Value::Empty, "b".into()]),
    )])
    .unwrap();
    let text = to_csv(&s);
    assert_eq!(text, "lot\na\n\"\"\nb\n");
    assert_eq!(from_csv(&text).unwrap(), s);
}

#[test]
fn json_rows_and_columns() {
    let s = Sheet::from_columns(vec![
        ("abv", ColumnData::Numbers(vec![40.0, 12.5])),
        (
            "lot",
            ColumnData::Values(vec!["A \"1\"".into(), Value::Empty]),
        ),
    ])
    .unwrap();
    let mut out = Vec::new();
    s.write_json(&mut out, JsonLayout::Rows).unwrap();
    assert_eq!(
        String::from_utf8(out).unwrap(),
        "[{\"abv\":40.0,\"lot\":\"A \\\"1\\\"\"},{\"abv\":12.5,\"lot\":null}]\n"
    );
    let mut out = Vec::new();
    s.write_json(&mut out, JsonLayout::Columns).unwrap();
    assert_eq!(
        String::from_utf8(out).unwrap(),
        "{\"abv\":[40.0,12.5],\"lot\":[\"A \\\"1\\\"\",null]}\n"
    );
}

// ------------------------------------------------------------ CSV: input

#[test]
fn csv_types_columns() {
    let s = from_csv("t, rho ,lot\n20, 998.2 ,007\n25,997.05,B\n").unwrap();
    assert_eq!(s.column_names(), vec!["t", " rho ", "lot"]);
    assert_eq!(xs(&s, " rho "), vec![998.2, 997.05]);
    // A text column keeps number-like fields as written.
    assert_eq!(s.get(0, "lot").unwrap(), CellRef::Text("007"));
    let s = from_csv("name,v\nx,1\n,2\n").unwrap();
    assert_eq!(s.get(1, "name").unwrap(), CellRef::Empty);
    let s = from_csv("a,b\n").unwrap();
    assert_eq!((s.nrows(), s.ncols()), (0, 2));
    // Byte-order mark and CRLF line ends.
    let s = from_csv("\u{feff}\"a\",b\r\n1,2\r\n").unwrap();
    assert_eq!(s.column_names(), vec!["a", "b"]);
    assert_eq!(xs(&s, "b"), vec![2.0]);
}

#[test]
fn csv_blank_lines() {
    // Trailing blank lines are not rows.
    assert_eq!(from_csv("x\n1\n2\n\n\n").unwrap().nrows(), 2);
    // Between rows of a multi-column file a blank line cannot be a row.
    assert_eq!(from_csv("a,b\n1,2\n\n3,4\n").unwrap().nrows(), 2);
    // In a one-column file it could be an empty cell: refused, not dropped.
    assert_csv_error(
        from_csv("x\n1\n\n2\n"),
        3,
        None,
        "blank line in a one-column file",
    );
}

#[track_caller]
fn assert_csv_error(r: Result<Sheet, Error>, line: u64, column: Option<usize>, words: &str) {
    match r {
        Err(Error::Csv {
            line: l,
            column: c,
            ref message,
        }) => {
            assert_eq!((l, c), (line, column), "{message}");
            assert!(message.contains(words), "{message:?} lacks {words:?}");
        }
        other => panic!("expected a csv error, got {other:?}"),
    }
}

#[test]
fn csv_ragged_rows() {
    assert_csv_error(
        from_csv("a,b,c\n1,2,3\n4,5\n"),
        3,
        Some(3),
        "this row has 2 fields but the header has 3: fields are missing (\"c\" onwards)",
    );
    assert_csv_error(from_csv("a,b\n1,2\n3,4,5\n"), 3, Some(3), "extra fields");
    let e = from_csv("a,b\n1,2\n3,4,5\n").unwrap_err();
    assert_eq!(
        e.to_string(),
        "csv line 3, column 3: this row has 3 fields but the header has 2: there are extra fields"
    );
}

#[test]
fn csv_unterminated_quotes() {
    // The open quote swallows the rest; the record still has two fields.
    assert_csv_error(
        from_csv("a,b\n1,\"x\n2,y\n3,z\n"),
        2,
        Some(2),
        "never closed",
    );
    // The swallowed record comes out short: still reported as the quote.
    assert_csv_error(
        from_csv("a,b,c\n1,\"x,2\n4,5,6\n"),
        2,
        Some(2),
        "never closed",
    );
    // In the header.
    assert_csv_error(from_csv("a,\"b\n1,2\n"), 1, Some(2), "never closed");
    // An earlier ragged row is reported as such, not the later quote.
    assert_csv_error(
        from_csv("a,b\n1\n2,\"x\n"),
        2,
        Some(2),
        "fields are missing",
    );
    // Properly closed multi-line fields and doubled quotes are fine.
    let s = from_csv("a,b\n\"x\n\"\"y\"\"\",1\n").unwrap();
    assert_eq!(s.get(0, "a").unwrap(), CellRef::Text("x\n\"y\""));
}

#[test]
fn csv_invalid_utf8() {
    let r = Sheet::read_csv(&b"a,b\n1,ok\n2,ab\xffcd\n"[..], &CsvOptions::default());
    assert_csv_error(r, 3, Some(2), "invalid UTF-8 in column \"b\" after \"ab\"");
    // Inside a multi-line field: the line of the bad byte.
    let r = Sheet::read_csv(&b"a,b\n1,\"x\ny\xff\"\n"[..], &CsvOptions::default());
    assert_csv_error(r, 3, Some(2), "invalid UTF-8");
    let r = Sheet::read_csv(&b"a,\xff\n1,2\n"[..], &CsvOptions::default());
    assert_csv_error(r, 1, Some(2), "invalid UTF-8 in the header");
}

#[test]
fn csv_non_finite_and_empty_numbers() {
    assert_csv_error(
        from_csv("t,rho\n20,998.2\n25,NaN\n"),
        3,
        Some(2),
        "\"rho\" is a numeric column but this field is \"NaN\", which is not a finite number",
    );
    assert_csv_error(from_csv("x\n1\ninf\n"), 3, Some(1), "\"inf\"");
    assert_csv_error(from_csv("x,y\n1,-Infinity\n2,3\n"), 2, Some(2), "finite");
    assert_csv_error(
        from_csv("a,b\n1,2\n,3\n"),
        3,
        Some(1),
        "\"a\" is a numeric column but this field is empty",
    );
    // The earliest fault wins, wherever its column.
    assert_csv_error(from_csv("a,b\n1,2\n3,nan\n,4\n"), 3, Some(2), "nan");
    // Lines are counted through multi-line quoted fields.
    assert_csv_error(
        from_csv("name,v\n\"two\nlines\",1\nz,nan\n"),
        4,
        Some(2),
        "nan",
    );
    assert_csv_error(
        from_csv("name,v\n\"two\nlines\",nan\nz,1\n"),
        3,
        Some(2),
        "nan",
    );
    // With empty numbers allowed, an empty field is an empty cell.
    let opts = CsvOptions {
        allow_empty_numbers: true,
        ..CsvOptions::default()
    };
    let s = Sheet::read_csv(&b"a,b\n1,2\n,3\n"[..], &opts).unwrap();
    assert_eq!(s.get(1, "a").unwrap(), CellRef::Empty);
    assert_eq!(s.get(0, "a").unwrap(), CellRef::Number(1.0));
    assert!(Sheet::read_csv(&b"a\n1\nnan\n"[..], &opts).is_err());
}

#[test]
fn csv_header_faults() {
    assert_csv_error(from_csv(""), 1, None, "empty");
    assert_csv_error(
        from_csv("a,b,a\n1,2,3\n"),
        1,
        Some(3),
        "\"a\" is used twice (columns 1 and 3)",
    );
    assert_csv_error(from_csv("a,,c\n1,2,3\n"), 1, Some(2), "blank");
    assert_csv_error(from_csv("a, \n1,2\n"), 1, Some(2), "blank");
}

#[test]
fn csv_other_delimiters() {
    let opts = CsvOptions {
        delimiter: b';',
        ..CsvOptions::default()
    };
    let s = Sheet::read_csv(&b"a;b\n1;x,y\n"[..], &opts).unwrap();
    assert_eq!(s.get(0, "b").unwrap(), CellRef::Text("x,y"));
    let mut out = Vec::new();
    s.write_csv(&mut out, &opts).unwrap();
    assert_eq!(out, b"a;b\n1;x,y\n");
}

/// A writer that fails after `left` bytes, like a full disk.
struct Full {
    left: usize,
}

impl std::io::Write for Full {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        if self.left == 0 {
            return Err(std::io::Error::new(
                std::io::ErrorKind::WriteZero,
                "no space left",
            ));
        }
        let n = buf.len().min(self.left);
        self.left -= n;
        Ok(n)
    }
    fn flush(&mut self) -> std::io::Result<()> {
        Ok(())
    }
}

#[test]
fn write_errors_are_reported() {
    let s = data(&[("x", (0..10_000).map(|i| i as f64).collect())]);
    let e = s
        .write_csv(Full { left: 100 }, &CsvOptions::default())
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::Io {
                kind: std::io::ErrorKind::WriteZero,
                ..
            }
        ),
        "{e:?}"
    );
    let e = s
        .write_json(Full { left: 100 }, JsonLayout::Rows)
        .unwrap_err();
    assert!(matches!(e, Error::Io { .. }), "{e:?}");
}

// ------------------------------------------------------------ round trip

/// Text that cannot be read as a number, so the column stays text.
fn texty() -> impl Strategy<Value = String> {
    "[a-zA-Z ,;\"'\n\r\té€漢😀-][a-zA-Z0-9 ,;\"'\n\r\té€漢😀.-]{0,7}"
        .prop_filter("reads as a number", |s| s.trim().parse::<f64>().is_err())
        .prop_filter("blank", |s| !s.trim().is_empty())
}

fn any_text() -> impl Strategy<Value = Value> {
    prop_oneof![
        3 => "[a-zA-Z0-9 ,;\"'\n\r\té€漢😀.+-]{0,8}".prop_map(Value::from),
        1 => Just(Value::Empty),
    ]
}

fn finite() -> impl Strategy<Value = f64> {
    prop_oneof![
        any::<f64>().prop_filter("finite", |x| x.is_finite()),
        (-1000i32..1000).prop_map(|i| i as f64 / 8.0),
        Just(0.1 + 0.2),
        Just(-0.0),
    ]
}

fn column(nrows: usize) -> impl Strategy<Value = ColumnData> {
    prop_oneof![
        prop::collection::vec(finite(), nrows).prop_map(ColumnData::Numbers),
        (prop::collection::vec(any_text(), nrows), texty(), 0..nrows).prop_map(|(mut v, t, at)| {
            v[at] = Value::Text(t);
            ColumnData::Values(v)
        }),
    ]
}

fn sheets() -> impl Strategy<Value = Sheet> {
    (1usize..12, 1usize..5).prop_flat_map(|(nrows, ncols)| {
        (
            prop::collection::hash_set(texty(), ncols),
            prop::collection::vec(column(nrows), ncols),
        )
            .prop_map(|(names, cols)| {
                Sheet::from_columns(names.into_iter().zip(cols).collect()).unwrap()
            })
    })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(300))]

    #[test]
    fn csv_round_trip(s in sheets()) {
        let mut out = Vec::new();
        s.write_csv(&mut out, &CsvOptions::default()).unwrap();
        let back = Sheet::read_csv(&out[..], &CsvOptions::default());
        prop_assert_eq!(back, Ok(s), "csv was {:?}", String::from_utf8_lossy(&out));
    }
}

// ------------------------------------------------------------ display

#[test]
fn render_aligns_numbers_on_the_point() {
    let s = Sheet::from_columns(vec![
        ("abv", ColumnData::Numbers(vec![40.0, 5.25, 100.0])),
        ("rho", ColumnData::Numbers(vec![948.1234567, 991.0, 1.5e-7])),
        (
            "lot",
            ColumnData::Values(vec!["A-1".into(), "line\nbreak".into(), Value::Empty]),
        ),
    ])
    .unwrap();
    let expected = "\
row     abv       rho  lot
───  ──────  ────────  ───────────
  1   40     948.123   A-1
  2    5.25  991       line\\nbreak
  3  100       1.5e-7
";
    assert_eq!(s.render(&RenderOptions::default()), expected);
    assert_eq!(s.to_string(), expected);
}

#[test]
fn render_cuts_long_sheets() {
    let s = data(&[("x", (1..=100).map(|i| i as f64 * 1.5).collect())]);
    let text = s.to_string();
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), 2 + 10 + 1 + 5);
    assert_eq!(lines[2], "  1    1.5");
    assert_eq!(lines[12], "… 85 more rows …");
    assert_eq!(lines[17], "100  150");
    let short = data(&[("x", vec![1.0; 16])]);
    assert_eq!(short.to_string().lines().count(), 18, "no cut for one row");
    let opts = RenderOptions {
        significant: 3,
        row_numbers: false,
        ..RenderOptions::default()
    };
    assert_eq!(
        data(&[("x", vec![2.0 / 3.0, 123456.0])]).render(&opts),
        "     x\n──────\n0.667\n1.23e5\n"
    );
}

// ------------------------------------------------------------ atomic file

#[test]
fn a_failed_export_leaves_no_file() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("table.csv");
    let s = data(&[("x", vec![1.0, 2.0])]);
    let r: Result<(), Error> = meniscus::io::write_atomically(&path, |w| {
        s.write_csv(&mut *w, &CsvOptions::default())?;
        Err(Error::Invalid("interrupted".into()))
    });
    assert_eq!(r.unwrap_err(), Error::Invalid("interrupted".into()));
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);

    meniscus::io::write_atomically(&path, |w| s.write_csv(w, &CsvOptions::default())).unwrap();
    let back = Sheet::read_csv(std::fs::File::open(&path).unwrap(), &CsvOptions::default());
    assert_eq!(back.unwrap(), s);
    assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 1);
}

// ------------------------------------------------------------ consistency

#[derive(Debug, Clone)]
enum Edit {
    Set { row: usize, col: bool, x: f64 },
    AddRow(f64, f64),
    Sort { by: usize, ascending: bool },
    KeepAbove(f64),
}

fn edits() -> impl Strategy<Value = Vec<Edit>> {
    let small = (-40i32..40).prop_map(|i| i as f64 / 4.0);
    prop::collection::vec(
        prop_oneof![
            6 => (0usize..64, any::<bool>(), small.clone())
                .prop_map(|(row, col, x)| Edit::Set { row, col, x }),
            2 => (small.clone(), small.clone()).prop_map(|(a, b)| Edit::AddRow(a, b)),
            1 => (0usize..6, any::<bool>()).prop_map(|(by, ascending)| Edit::Sort { by, ascending }),
            1 => small.prop_map(Edit::KeepAbove),
        ],
        1..30,
    )
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(200))]

    /// After any sequence of edits every formula cell equals its formula
    /// applied to its row (a full recalculation changes nothing), and each
    /// `set` evaluates exactly the dependents of the column, once each.
    #[test]
    fn edits_keep_every_formula_cell_current(
        x in prop::collection::vec(-10i32..10, 1..8),
        list in edits(),
    ) {
        let x: Vec<f64> = x.into_iter().map(f64::from).collect();
        let y: Vec<f64> = x.iter().map(|v| v * 0.5 - 1.0).collect();
        let mut s = data(&[("x", x), ("y", y)]);
        let mut ev = Log::default();
        s.add_formula("a", &["x"], FormulaId(2), &mut ev).unwrap(); // x + 1
        s.add_formula("b", &["a"], FormulaId(1), &mut ev).unwrap(); // 2a
        s.add_formula("c", &["a", "y"], FormulaId(3), &mut ev).unwrap(); // a y
        s.add_formula("d", &["y"], FormulaId(4), &mut ev).unwrap(); // y - 1
        let names = ["x", "y", "a", "b", "c", "d"];
        for e in list {
            ev.calls.clear();
            match e {
                Edit::Set { row, col, x } => {
                    if s.nrows() == 0 { continue; }
                    let row = row % s.nrows();
                    let col = if col { "x" } else { "y" };
                    s.set(row, col, Value::Number(x), &mut ev).unwrap();
                    let mut ids = ev.ids();
                    ids.sort();
                    let expected = if col == "x" { vec![1, 2, 3] } else { vec![3, 4] };
                    prop_assert_eq!(ids, expected);
                    prop_assert!(ev.calls.iter().all(|c| c.1 == row));
                }
                Edit::AddRow(a, b) => s.add_row(vec![a.into(), b.into()], &mut ev).unwrap(),
                Edit::Sort { by, ascending } => s.sort(names[by], ascending).unwrap(),
                Edit::KeepAbove(t) => {
                    s = s.filter(|r| Ok(r.get("c").and_then(|c| c.as_number()).unwrap() > t)).unwrap()
                }
            }
            let mut fresh = s.clone();
            fresh.recalculate(&mut ev).unwrap();
            prop_assert_eq!(&fresh, &s);
        }
    }
}

/// Mostly well-formed CSV built from awkward fields, sometimes with one
/// byte changed, so that both acceptance and each refusal get exercised.
fn csvish() -> impl Strategy<Value = Vec<u8>> {
    let field = prop::sample::select(vec![
        "1",
        "2.5",
        " -3e2 ",
        "",
        "a",
        " x ",
        "\"q,\"\"\"",
        "nan",
        "\"two\nlines\"",
        "007",
        "\"\"",
    ]);
    let grid = (1usize..4, 0usize..5).prop_flat_map(move |(w, h)| {
        prop::collection::vec(prop::collection::vec(field.clone(), w), h + 1)
    });
    let built = (
        grid,
        any::<bool>(),
        prop::option::weighted(0.3, (any::<prop::sample::Index>(), any::<u8>())),
    )
        .prop_map(|(rows, crlf, change)| {
            let end = if crlf { "\r\n" } else { "\n" };
            let mut text = String::new();
            for (i, row) in rows.iter().enumerate() {
                if i == 0 {
                    // Header names: distinct and not blank.
                    let names: Vec<String> = (0..row.len()).map(|j| format!("c{j}")).collect();
                    text.push_str(&names.join(","));
                } else {
                    text.push_str(&row.join(","));
                }
                text.push_str(end);
            }
            let mut bytes = text.into_bytes();
            if let Some((at, b)) = change {
                let i = at.index(bytes.len());
                bytes[i] = b;
            }
            bytes
        });
    let raw = prop::collection::vec(
        prop_oneof![
            4 => prop::sample::select(b"a1.5,\"\n\r ;-e".to_vec()),
            1 => any::<u8>(),
        ],
        0..60,
    );
    prop_oneof![3 => built, 1 => raw]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(2000))]

    /// Whatever the bytes, reading never panics; whatever it accepts is
    /// written and read back to the same sheet.
    #[test]
    fn any_input_is_refused_cleanly_or_round_trips(bytes in csvish()) {
        let opts = CsvOptions::default();
        if let Ok(s) = Sheet::read_csv(&bytes[..], &opts) {
            let mut out = Vec::new();
            s.write_csv(&mut out, &opts).unwrap();
            prop_assert_eq!(Sheet::read_csv(&out[..], &opts), Ok(s));
        }
    }
}
