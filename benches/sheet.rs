//! Sheet benchmarks (plain `main`, no harness):
//! - the per-row cost of the sheet machinery around a formula column, with
//!   a trivial Rust evaluator, against the same arithmetic in a bare loop;
//! - CSV output of a two-way table of 81,081 rows × 3 numeric columns, to
//!   memory and to a file through the atomic writer; CSV input of the same.
//!
//! Run: `cargo bench --no-default-features --bench sheet`
//! Prints the minimum and median of several repetitions.

use std::hint::black_box;
use std::time::{Duration, Instant};

use meniscus::kernel::sheet::{
    ColumnData, ColumnSink, CsvOptions, EvalError, Evaluator, FormulaId, Grid, RowView, RowsView,
    Sheet, Value,
};

fn measure<T>(reps: usize, mut f: impl FnMut() -> T) -> (Duration, Duration) {
    let mut times: Vec<Duration> = (0..reps)
        .map(|_| {
            let t0 = Instant::now();
            black_box(f());
            t0.elapsed()
        })
        .collect();
    times.sort();
    (times[0], times[reps / 2])
}

fn report(what: &str, (min, median): (Duration, Duration), per: Option<(usize, &str)>) {
    let ms = |d: Duration| d.as_secs_f64() * 1e3;
    match per {
        Some((n, unit)) => println!(
            "{what:<58} min {:>8.3} ms  median {:>8.3} ms  = {:>7.2} ns/{unit} (min)",
            ms(min),
            ms(median),
            min.as_secs_f64() * 1e9 / n as f64
        ),
        None => println!(
            "{what:<58} min {:>8.3} ms  median {:>8.3} ms",
            ms(min),
            ms(median)
        ),
    }
}

/// Row by row through `eval_row` (the trait's default `eval_rows`).
fn per_row(_f: FormulaId, row: RowView<'_>) -> Result<Value, String> {
    match row.dep_number(0) {
        Some(x) => Ok(Value::Number(x * 2.0 + 1.0)),
        None => Err("x is not a number".into()),
    }
}

/// A whole chunk at a time from the dependency slice.
struct Columnwise;

impl Evaluator for Columnwise {
    fn eval_row(&mut self, f: FormulaId, row: RowView<'_>) -> Result<Value, String> {
        per_row(f, row)
    }

    fn eval_rows(
        &mut self,
        _f: FormulaId,
        rows: RowsView<'_>,
        out: &mut ColumnSink,
    ) -> Result<(), EvalError> {
        let range = rows.range();
        let Some(x) = rows.dep_column(0).and_then(|c| c.as_numbers()) else {
            return Err(EvalError {
                row: range.start,
                message: "x is not numeric".into(),
            });
        };
        for &v in &x[range] {
            out.push_number(v * 2.0 + 1.0);
        }
        Ok(())
    }
}

fn main() {
    let n = 100_000;
    let x: Vec<f64> = (0..n).map(|i| i as f64 * 0.37).collect();

    println!("-- formula machinery, {n} rows, one formula column y = 2x + 1");
    let baseline = measure(50, || {
        let y: Vec<f64> = black_box(&x).iter().map(|v| v * 2.0 + 1.0).collect();
        y
    });
    report("bare loop into a new Vec<f64>", baseline, Some((n, "row")));

    let mut s = Sheet::from_columns(vec![("x", ColumnData::Numbers(x.clone()))]).unwrap();
    let mut ev = per_row;
    s.add_formula("y", &["x"], FormulaId(1), &mut ev).unwrap();
    let t = measure(50, || s.recalculate(&mut per_row).unwrap());
    report(
        "recalculate, row evaluator (eval_row per row)",
        t,
        Some((n, "row")),
    );
    let t = measure(50, || s.recalculate(&mut Columnwise).unwrap());
    report(
        "recalculate, column evaluator (eval_rows per chunk)",
        t,
        Some((n, "row")),
    );

    let mut k = 0usize;
    let t = measure(20, || {
        for _ in 0..1000 {
            k = (k + 7919) % n;
            s.set(k, "x", Value::Number(k as f64), &mut per_row)
                .unwrap();
        }
    });
    report(
        "set() of one cell with one dependent, x1000",
        t,
        Some((1000, "set")),
    );

    let t = measure(20, || {
        let mut s = Sheet::new(&["x"]).unwrap();
        s.add_formula("y", &["x"], FormulaId(1), &mut per_row)
            .unwrap();
        for &v in &x {
            s.add_row(vec![Value::Number(v)], &mut per_row).unwrap();
        }
        s
    });
    report(
        "add_row() x 100000 with one formula column",
        t,
        Some((n, "row")),
    );

    let t = measure(20, || s.filter(|r| Ok(r.index() % 2 == 0)).unwrap());
    report("filter keeping every other row", t, Some((n, "row")));
    let t = measure(20, || {
        let mut c = s.clone();
        c.sort("y", false).unwrap();
        c
    });
    report("clone + sort descending by y", t, Some((n, "row")));

    // Two-way table: 1001 strengths (0 to 100 in steps of 0.1) × 81
    // temperatures (-20 to 60 °C): 81,081 rows in long form. The value is
    // an invented smooth function, so its digits are as long as real
    // computed results.
    let abv: Vec<f64> = (0..=1000).map(|i| i as f64 / 10.0).collect();
    let temp: Vec<f64> = (-20..=60).map(|i| i as f64).collect();
    let grid = Grid {
        row_name: "abv",
        row_values: &abv,
        col_name: "t",
        col_values: &temp,
    };
    let f = |a: f64, t: f64| {
        Ok(998.2 - 1.37 * a + 0.0021 * a * a - 0.21 * (t - 20.0) / (1.0 + a / 37.0))
    };
    let table = grid.long("value", f, &mut |_, _| {}).unwrap();
    let rows = table.nrows();
    println!("-- CSV, {rows} rows × 3 numeric columns");
    let t = measure(5, || grid.long("value", f, &mut |_, _| {}).unwrap());
    report("grid build (long form)", t, Some((rows, "row")));

    let opts = CsvOptions::default();
    let mut bytes = Vec::new();
    table.write_csv(&mut bytes, &opts).unwrap();
    let t = measure(10, || {
        let mut out = Vec::with_capacity(bytes.len());
        table.write_csv(&mut out, &opts).unwrap();
        out
    });
    report(
        &format!("write_csv to memory ({} bytes)", bytes.len()),
        t,
        Some((rows, "row")),
    );

    let dir = std::env::temp_dir().join(format!("meniscus-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("table.csv");
    let t = measure(10, || {
        meniscus::io::write_atomically(&path, |w| table.write_csv(w, &opts)).unwrap()
    });
    report(
        "write_csv to a file via write_atomically (fsync)",
        t,
        Some((rows, "row")),
    );
    let _ = std::fs::remove_dir_all(&dir);

    let t = measure(10, || Sheet::read_csv(&bytes[..], &opts).unwrap());
    report("read_csv from memory", t, Some((rows, "row")));
    assert_eq!(Sheet::read_csv(&bytes[..], &opts).unwrap(), table);
}
