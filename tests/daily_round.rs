//! The main job end to end: `meniscus run scripts/daily_round.lua` on a
//! copy of the bundled demo data in a temporary directory. The output
//! tables must exist, parse, hold one row per tank and per order, and agree
//! with the same workflow replayed here with the kernel called directly
//! from the input files (instrument reading → true strength → pure
//! alcohol; orders in sequence). Malformed data must stop the script with
//! exit status 1, one `file:line: message` line, and no output written.
#![cfg(all(feature = "cli", feature = "plot"))]

use std::path::{Path, PathBuf};
use std::process::Output;

use meniscus::kernel::process::{self, Lot, Weighing};
use meniscus::kernel::sheet::{CellRef, CsvOptions};
use meniscus::kernel::{Composition, EthanolWater, HydrometerScale, Mixture, Sheet, GLASS_ALPHA};

mod common;
const OUTPUTS: [&str; 3] = ["tanks.csv", "plan.csv", "daily_round.svg"];

fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn script() -> PathBuf {
    repo().join("scripts").join("daily_round.lua")
}

/// A temporary working directory holding a copy of demo-data/.
fn workdir() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().join("demo-data");
    std::fs::create_dir(&data).unwrap();
    for entry in std::fs::read_dir(repo().join("demo-data")).unwrap() {
        let entry = entry.unwrap();
        std::fs::copy(entry.path(), data.join(entry.file_name())).unwrap();
    }
    dir
}

fn run_in(dir: &Path, extra: &[&str]) -> Output {
    common::meniscus()
        .current_dir(dir)
        .args(extra)
        .output()
        .expect("start meniscus")
}

fn run_script(dir: &Path) -> Output {
    let s = script();
    run_in(dir, &["run", s.to_str().unwrap()])
}

fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).into_owned()
}

fn read_sheet(path: &Path) -> Sheet {
    let bytes = std::fs::read(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let options = CsvOptions {
        allow_empty_numbers: true,
        ..CsvOptions::default()
    };
    Sheet::read_csv(&bytes[..], &options).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

fn num(s: &Sheet, row: usize, col: &str) -> f64 {
    match s.get(row, col).unwrap() {
        CellRef::Number(x) => x,
        other => panic!("row {row}, {col}: expected a number, got {other:?}"),
    }
}

fn txt(s: &Sheet, row: usize, col: &str) -> String {
    match s.get(row, col).unwrap() {
        CellRef::Text(t) => t.to_string(),
        CellRef::Number(x) => x.to_string(),
        CellRef::Empty => String::new(),
    }
}

/// `got` (rounded by the script to `places` decimals) against `want`.
fn check(what: &str, got: f64, want: f64, places: i32) {
    let tol = 0.5 * 10f64.powi(-places) + 1e-9 * want.abs();
    assert!(
        (got - want).abs() <= tol,
        "{what}: got {got}, the kernel gives {want}"
    );
}

/// What a tank holds, as the replay goes: true mass and mass fraction.
#[derive(Clone, Copy)]
struct State {
    mass: f64,
    w: f64,
}

#[test]
fn daily_round_writes_tables_that_agree_with_the_kernel() {
    let dir = workdir();
    let out = run_script(dir.path());
    assert!(
        out.status.success(),
        "exit {:?}\nstdout:\n{}\nstderr:\n{}",
        out.status.code(),
        text(&out.stdout),
        text(&out.stderr)
    );
    let screen = text(&out.stdout);
    assert!(screen.contains("Cautions"), "{screen}");
    assert!(screen.contains("prescribes"), "{screen}");
    assert!(screen.contains("flammable"), "{screen}");
    for f in OUTPUTS {
        assert!(dir.path().join("out").join(f).is_file(), "out/{f} missing");
    }
    let svg = std::fs::read_to_string(dir.path().join("out/daily_round.svg")).unwrap();
    assert!(svg.starts_with("<svg"));

    let m = EthanolWater::new();
    let log = read_sheet(&repo().join("demo-data/tank_log.csv"));
    let orders = read_sheet(&repo().join("demo-data/orders.csv"));
    let tanks = read_sheet(&dir.path().join("out/tanks.csv"));
    let plan = read_sheet(&dir.path().join("out/plan.csv"));
    assert_eq!(tanks.nrows(), log.nrows(), "one row per tank");
    assert_eq!(plan.nrows(), orders.nrows(), "one row per order");

    // The morning figures, replayed from the tank log.
    let mut states: Vec<(String, State)> = Vec::new();
    for r in 0..log.nrows() {
        let name = txt(&log, r, "tank");
        assert_eq!(txt(&tanks, r, "tank"), name);
        let (reading, t) = (num(&log, r, "reading"), num(&log, r, "t_c"));
        let s = match txt(&log, r, "instrument").as_str() {
            "density" => m.strength_from_density(reading, t).unwrap(),
            "hydrometer_abv" => m
                .hydrometer(HydrometerScale::AbvAt20 { alpha: GLASS_ALPHA }, reading, t)
                .unwrap(),
            "hydrometer_proof" => m
                .hydrometer(
                    HydrometerScale::ProofAt60F { alpha: GLASS_ALPHA },
                    reading,
                    t,
                )
                .unwrap(),
            other => panic!("unknown instrument {other} in the demo data"),
        };
        let amount = num(&log, r, "amount");
        let lot = match txt(&log, r, "unit").as_str() {
            "L" => Lot::volume(amount, t, Composition::W(s.w)),
            "kg" => Lot::weighed_in_air(amount, t, Composition::W(s.w), Weighing::default()),
            other => panic!("unknown unit {other} in the demo data"),
        };
        let p = process::pure_alcohol(&m, &lot).unwrap();
        check(&format!("{name} abv"), num(&tanks, r, "abv"), s.abv, 4);
        check(
            &format!("{name} proof"),
            num(&tanks, r, "proof"),
            p.proof,
            4,
        );
        check(
            &format!("{name} mass"),
            num(&tanks, r, "mass_kg"),
            p.mass,
            3,
        );
        check(
            &format!("{name} volume"),
            num(&tanks, r, "volume_l20"),
            p.volume_20,
            3,
        );
        check(&format!("{name} lpa"), num(&tanks, r, "lpa"), p.lpa, 3);
        check(
            &format!("{name} proof gallons"),
            num(&tanks, r, "proof_gallons"),
            p.proof_gallons,
            3,
        );
        states.push((
            name,
            State {
                mass: p.mass,
                w: p.w,
            },
        ));
    }

    // The orders, in sequence.
    let mut water_per_tank = vec![0.0; states.len()];
    for r in 0..orders.nrows() {
        let id = txt(&orders, r, "order");
        assert_eq!(txt(&plan, r, "order"), id);
        let i = states
            .iter()
            .position(|(n, _)| *n == txt(&orders, r, "tank"))
            .expect("order for a known tank");
        let st = states[i].1;
        let lot = Lot::mass(st.mass, Composition::W(st.w));
        match txt(&orders, r, "action").as_str() {
            "reduce" => {
                let target = num(&orders, r, "target_abv");
                let water_t = num(&orders, r, "water_t_c");
                let red =
                    process::reduce_with_water_at(&m, &lot, Composition::abv(target), water_t)
                        .unwrap();
                check(
                    &format!("{id} water at t"),
                    num(&plan, r, "water_l_at_t"),
                    red.water_l_at_t,
                    3,
                );
                check(
                    &format!("{id} water kg"),
                    num(&plan, r, "water_kg"),
                    red.water_kg,
                    3,
                );
                check(
                    &format!("{id} water 20"),
                    num(&plan, r, "water_l20"),
                    red.water_l,
                    3,
                );
                check(
                    &format!("{id} contraction"),
                    num(&plan, r, "contraction_l"),
                    red.contraction,
                    3,
                );
                check(
                    &format!("{id} volume after"),
                    num(&plan, r, "volume_after_l20"),
                    red.final_volume,
                    3,
                );
                check(
                    &format!("{id} abv after"),
                    num(&plan, r, "abv_after"),
                    target,
                    4,
                );
                water_per_tank[i] += red.water_l;
                states[i].1 = State {
                    mass: red.final_mass,
                    w: red.final_w,
                };
            }
            "bottle" => {
                let size = num(&orders, r, "bottle_l");
                let b = process::bottling(&m, &lot, size).unwrap();
                assert_eq!(num(&plan, r, "bottles"), b.bottles as f64, "{id} bottles");
                check(
                    &format!("{id} remainder"),
                    num(&plan, r, "remainder_l20"),
                    b.remainder_l,
                    3,
                );
                let left = process::pure_alcohol(
                    &m,
                    &Lot::volume(b.remainder_l, 20.0, Composition::W(st.w)),
                )
                .unwrap();
                states[i].1 = State {
                    mass: left.mass,
                    w: st.w,
                };
            }
            other => panic!("unknown action {other} in the demo data"),
        }
    }

    // End of day per tank.
    for (r, (name, st)) in states.iter().enumerate() {
        let p = process::pure_alcohol(&m, &Lot::mass(st.mass, Composition::W(st.w))).unwrap();
        check(
            &format!("{name} end volume"),
            num(&tanks, r, "end_volume_l20"),
            p.volume_20,
            3,
        );
        check(
            &format!("{name} end lpa"),
            num(&tanks, r, "end_lpa"),
            p.lpa,
            3,
        );
        check(
            &format!("{name} water added"),
            num(&tanks, r, "water_added_l20"),
            water_per_tank[r],
            3,
        );
    }
}

#[test]
fn data_and_output_elsewhere_with_allow_path() {
    let data = workdir();
    let cwd = tempfile::tempdir().unwrap();
    let data_dir = data.path().join("demo-data");
    let out_dir = data.path().join("results").join("today");
    let s = script();
    let out = run_in(
        cwd.path(),
        &[
            "--allow-path",
            data.path().to_str().unwrap(),
            "run",
            s.to_str().unwrap(),
            data_dir.to_str().unwrap(),
            out_dir.to_str().unwrap(),
        ],
    );
    assert!(out.status.success(), "{}", text(&out.stderr));
    for f in OUTPUTS {
        assert!(out_dir.join(f).is_file(), "{f} missing");
    }
    // Without the permission the output directory is refused.
    let other = tempfile::tempdir().unwrap();
    let out = run_in(
        cwd.path(),
        &[
            "--allow-path",
            data.path().to_str().unwrap(),
            "run",
            s.to_str().unwrap(),
            data_dir.to_str().unwrap(),
            other.path().join("out").to_str().unwrap(),
        ],
    );
    assert_eq!(out.status.code(), Some(1));
    assert!(text(&out.stderr).contains("outside the working directory"));
    assert!(!other.path().join("out").exists());
}

/// Replaces `from` by `to` in one demo file of `dir`.
fn corrupt(dir: &Path, file: &str, from: &str, to: &str) {
    let p = dir.join("demo-data").join(file);
    let s = std::fs::read_to_string(&p).unwrap();
    assert!(s.contains(from), "{file} lacks {from:?}");
    std::fs::write(&p, s.replacen(from, to, 1)).unwrap();
}

/// Runs the script on corrupted data: exit status 1, one error line citing
/// a file and line with every fragment, and no output file.
fn fails_cleanly(file: &str, from: &str, to: &str, fragments: &[&str]) {
    let dir = workdir();
    corrupt(dir.path(), file, from, to);
    let out = run_script(dir.path());
    let err = text(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "stderr: {err}");
    assert_eq!(err.lines().count(), 1, "one line: {err}");
    let line = err.trim_end();
    assert!(line.starts_with("error: "), "{line}");
    assert!(line.contains("daily_round.lua:"), "script location: {line}");
    let after = &line[line.find("daily_round.lua:").unwrap() + "daily_round.lua:".len()..];
    assert!(
        after.chars().next().is_some_and(|c| c.is_ascii_digit()),
        "line number: {line}"
    );
    for f in fragments {
        assert!(line.contains(f), "{line:?} lacks {f:?}");
    }
    for f in OUTPUTS {
        assert!(
            !dir.path().join("out").join(f).exists(),
            "out/{f} written despite the error"
        );
    }
}

#[test]
fn nan_in_the_tank_log_stops_the_round() {
    fails_cleanly(
        "tank_log.csv",
        "60.4,13.4",
        "NaN,13.4",
        &["tank_log.csv:4:", "column 6", "reading", "NaN"],
    );
}

#[test]
fn unknown_instrument_stops_the_round() {
    fails_cleanly(
        "tank_log.csv",
        "hydrometer_abv,46.1",
        "refractometer,46.1",
        &["tank T05", "unknown instrument 'refractometer'", "density"],
    );
}

#[test]
fn unknown_unit_and_impossible_reading_stop_the_round() {
    fails_cleanly(
        "tank_log.csv",
        "4820,L,",
        "4820,gal,",
        &["tank T01", "unknown unit 'gal'"],
    );
    fails_cleanly(
        "tank_log.csv",
        "964.85,18.6",
        "1200.5,18.6",
        &["tank T01", "1200.5", "not reachable"],
    );
    fails_cleanly(
        "tank_log.csv",
        "807.21,19.3",
        "807.21,65",
        &["tank T04", "65", "outside"],
    );
}

#[test]
fn bad_orders_stop_the_round() {
    fails_cleanly(
        "orders.csv",
        "R-102,T05,reduce,41.5",
        "R-102,T05,reduce,52",
        &["order R-102", "not below", "T05"],
    );
    fails_cleanly(
        "orders.csv",
        "R-103,T03",
        "R-103,T09",
        &["order R-103", "tank 'T09'"],
    );
    fails_cleanly(
        "orders.csv",
        "B-202,T03,bottle,,,0.5",
        "B-202,T03,bottle,,,",
        &["order B-202", "bottle_l is missing"],
    );
    fails_cleanly(
        "orders.csv",
        "B-201,T05,bottle",
        "B-201,T05,blend",
        &["order B-201", "unknown action 'blend'"],
    );
}

#[test]
fn an_error_leaves_earlier_output_untouched() {
    let dir = workdir();
    assert!(run_script(dir.path()).status.success());
    let before: Vec<Vec<u8>> = OUTPUTS
        .iter()
        .map(|f| std::fs::read(dir.path().join("out").join(f)).unwrap())
        .collect();
    corrupt(dir.path(), "tank_log.csv", "890.76", "inf");
    let out = run_script(dir.path());
    assert_eq!(out.status.code(), Some(1));
    for (f, b) in OUTPUTS.iter().zip(&before) {
        assert_eq!(
            &std::fs::read(dir.path().join("out").join(f)).unwrap(),
            b,
            "{f} changed"
        );
    }
}
