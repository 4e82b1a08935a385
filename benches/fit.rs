//! Benchmarks of the fitting engine (run with `cargo bench --bench fit`;
//! plain `main`, no harness). Goals: a fit of 10⁴ rows with automatic term
//! and order selection in ≤ 50 ms; partial molar volumes of a fitted model
//! at 10⁶ points in ≤ 50 ns per point.

use std::hint::black_box;
use std::time::{Duration, Instant};

use meniscus::kernel::fit::{fit, FitRow, FitSpec};
use meniscus::kernel::{EthanolWater, Mixture};

#[path = "../tests/common/noise.rs"]
mod noise;
use noise::Noise;

fn median(mut v: Vec<Duration>) -> Duration {
    v.sort();
    v[v.len() / 2]
}

fn main() {
    let ew = EthanolWater::new();
    // 10⁴ rows: 1000 compositions (pure ends included) at 10 temperatures,
    // density noise σ = 0.05 kg/m³.
    let mut noise = Noise(0x2545_F491_4F6C_DD1D);
    let mut rows = Vec::with_capacity(10_000);
    for it in 0..10 {
        let t = 5.0 + 3.0 * it as f64;
        for i in 0..1000 {
            let w = i as f64 / 999.0;
            rows.push(FitRow::new(w, ew.rho(w, t) + 0.05 * noise.normal(), t));
        }
    }
    let spec = FitSpec::new("ethanol-water (fitted)", ew.components().clone());

    let first = fit(&spec, &rows).expect("benchmark fit");
    println!(
        "fit of {} rows: chose {} terms, temperature order {}, {} candidates, residual sd {:.4} kg/m³",
        rows.len(),
        first.report.terms,
        first.report.t_order,
        first.report.aicc_table.len(),
        first.report.residual_sd_rho
    );
    let mut times = Vec::new();
    for _ in 0..15 {
        let t0 = Instant::now();
        let f = fit(black_box(&spec), black_box(&rows)).expect("benchmark fit");
        times.push(t0.elapsed());
        black_box(f);
    }
    let fit_ms = median(times).as_secs_f64() * 1e3;
    println!("fit, 10^4 rows, automatic selection: median {fit_ms:.2} ms (goal <= 50 ms)");

    let model = first.model;
    let n = 1_000_000;
    let ws: Vec<f64> = (0..n).map(|i| i as f64 / (n - 1) as f64).collect();
    let mut out = Vec::with_capacity(n);
    let mut times = Vec::new();
    for _ in 0..7 {
        let t0 = Instant::now();
        model
            .partial_molar_volumes_many(black_box(20.0), black_box(&ws), &mut out)
            .expect("bulk evaluation");
        times.push(t0.elapsed());
        black_box(&out);
    }
    let bulk_ns = median(times).as_secs_f64() * 1e9 / n as f64;
    println!("partial molar volumes, 10^6 points, bulk isotherm path: median {bulk_ns:.2} ns/point (goal <= 50 ns)");

    let mut times = Vec::new();
    for _ in 0..3 {
        let t0 = Instant::now();
        let mut acc = 0.0;
        for &w in &ws {
            let v = model
                .partial_molar_volumes(black_box(w), 20.0)
                .expect("point");
            acc += v[0] + v[1];
        }
        times.push(t0.elapsed());
        black_box(acc);
    }
    let trait_ns = median(times).as_secs_f64() * 1e9 / n as f64;
    println!("partial molar volumes, 10^6 points, checked Mixture trait method: median {trait_ns:.2} ns/point");

    let mut times = Vec::new();
    for _ in 0..3 {
        let t0 = Instant::now();
        let mut acc = 0.0;
        for &w in ws.iter().step_by(10) {
            let v = model
                .partial_molar_volumes_u(black_box(w), 20.0)
                .expect("point");
            acc += v[0].u + v[1].u;
        }
        times.push(t0.elapsed());
        black_box(acc);
    }
    let u_ns = median(times).as_secs_f64() * 1e9 / (n / 10) as f64;
    println!("partial molar volumes with uncertainties, 10^5 points: median {u_ns:.1} ns/point");
}
