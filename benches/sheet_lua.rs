//! Benchmarks of sheets driven from Lua (plain `main`, no harness), in one
//! host, timing only the sheet operation:
//! - a formula column over 10⁵ rows: pure Lua arithmetic, a mixture
//!   property through the keyword-table API, and a function formula;
//! - `s:set` of one cell with one dependent formula;
//! - the hydrometer temperature-correction grid of
//!   scripts/tables/hydrometer_correction.lua (1001 readings × 81
//!   temperatures = 81,081 inverse solves), point by point and vectorized.
//!
//! Run: `cargo bench --bench sheet_lua`
//! Prints the minimum and median of several repetitions. The whole-process
//! figure for the script is measured from the shell (see NOTES-sheetlua.md).

use std::time::{Duration, Instant};

use meniscus::lua::{Host, HostOptions};

/// CPU time of this thread so far (Linux: the scheduler's own count, in
/// ns), so that figures mean something on a machine shared with other
/// work; `None` elsewhere.
fn thread_cpu() -> Option<Duration> {
    let s = std::fs::read_to_string("/proc/thread-self/schedstat").ok()?;
    let ns: u64 = s.split_whitespace().next()?.parse().ok()?;
    Some(Duration::from_nanos(ns))
}

/// (min wall, median wall, min CPU) over `reps` runs.
fn measure(reps: usize, mut f: impl FnMut()) -> (Duration, Duration, Option<Duration>) {
    let mut wall = Vec::with_capacity(reps);
    let mut cpu = Vec::with_capacity(reps);
    for _ in 0..reps {
        let c0 = thread_cpu();
        let t0 = Instant::now();
        f();
        wall.push(t0.elapsed());
        if let (Some(c0), Some(c1)) = (c0, thread_cpu()) {
            cpu.push(c1 - c0);
        }
    }
    wall.sort();
    cpu.sort();
    (wall[0], wall[reps / 2], cpu.first().copied())
}

fn report(
    what: &str,
    (min, median, cpu): (Duration, Duration, Option<Duration>),
    n: usize,
    unit: &str,
) {
    let per = |d: Duration| d.as_secs_f64() * 1e9 / n as f64;
    let cpu = match cpu {
        Some(c) => format!(
            "  CPU min {:>7.2} ms = {:>6.0} ns/{unit}",
            c.as_secs_f64() * 1e3,
            per(c)
        ),
        None => String::new(),
    };
    println!(
        "{what:<44} wall min {:>7.2} ms  median {:>7.2} ms = {:>6.0} ns/{unit}{cpu}",
        min.as_secs_f64() * 1e3,
        median.as_secs_f64() * 1e3,
        per(min),
    );
}

fn run(h: &Host, src: &str) {
    if let Err(e) = h.eval(src, "=bench") {
        panic!("{src}: {}", e.message);
    }
}

fn main() {
    let dir = tempfile::tempdir().expect("temp dir");
    let h = Host::new(HostOptions {
        standard_plugin_dirs: false,
        allow_paths: vec![dir.path().to_path_buf()],
        ..HostOptions::default()
    })
    .expect("host");
    h.capture_output(true);
    let n = 100_000;
    run(
        &h,
        &format!(
            "m = mixture.ethanol_water()
             s = sheet.new{{}}
             s:set_column('abv', linspace(0, 100, {n}))
             s:set_column('t', linspace(5, 35, {n}))"
        ),
    );

    println!("-- one formula column over {n} rows (s:formula computes the whole column)");
    for (what, formula) in [
        ("expression  abv * 2 + t", "'abv * 2 + t'"),
        (
            "expression  m:density{abv = abv, t = t}",
            "'m:density{abv = abv, t = t}'",
        ),
        (
            "function    function(r) return r.abv * 2 + r.t end",
            "function(r) return r.abv * 2 + r.t end",
        ),
    ] {
        let src = format!("s:formula('y', {formula})");
        run(&h, &src);
        report(what, measure(7, || run(&h, &src)), n, "row");
    }

    println!("-- s:set of one cell, one dependent formula (abv * 2 + t)");
    run(&h, "s:formula('y', 'abv * 2 + t')");
    let k = 10_000;
    let src = format!("for i = 1, {k} do s:set(i, 'abv', i * 0.001) end");
    report("s:set", measure(5, || run(&h, &src)), k, "call");

    println!("-- hydrometer correction grid, 1001 readings x 81 temperatures = 81081 points");
    run(
        &h,
        "readings, temps = {}, {}
         for i = 0, 1000 do readings[#readings + 1] = i / 10 end
         for j = 0, 80 do temps[#temps + 1] = j / 2 end
         function point(r, t)
           local ok, s = pcall(m.hydrometer, m, {abv = r, t = t})
           if ok then return s.abv end
         end
         function row(r, ts)
           local ok, s = pcall(m.hydrometer, m, {abv = r, t = ts})
           if ok then return s.abv end
           local out = {}
           for j = 1, #ts do out[j] = point(r, ts[j]) end
           return out
         end",
    );
    let points = 81_081;
    let per_point = "g = sheet.grid{rows = {name = 'reading', values = readings},
                     cols = {name = 't', values = temps}, fn = point, layout = 'wide'}";
    report(
        "point by point (fn per point)",
        measure(5, || run(&h, per_point)),
        points,
        "point",
    );
    let vectorized = "g = sheet.grid{rows = {name = 'reading', values = readings},
                      cols = {name = 't', values = temps}, fn = row, vectorized = true,
                      layout = 'wide'}";
    report(
        "vectorized (fn per reading)",
        measure(5, || run(&h, vectorized)),
        points,
        "point",
    );
    let path = dir.path().join("hydrometer.csv");
    run(&h, &format!("csv_path = {:?}", path.display().to_string()));
    report(
        "write_csv of the wide table (atomic, with fsync)",
        measure(5, || run(&h, "g:write_csv(csv_path)")),
        points,
        "point",
    );
}
