//! Throughput of the ethanol–water reference model over 10⁶ points spread
//! over 0–100 % mass and −20…40 °C: forward density, ∂ρ/∂w, and the
//! inverse solve (density → mass fraction, and on to % vol at 20 °C), and
//! % vol → mass fraction point by point.
//!
//! Each benchmark processes all 10⁶ points per iteration, so criterion's
//! time per iteration in milliseconds reads directly as nanoseconds per
//! point. Two layouts of the points:
//! - "diagonal": `w` rising 0 → 1 while `t` falls 40 → −20 °C, the layout
//!   of the NumPy peer (`/work/shared/bench/peer_numpy.py`), for comparison;
//! - "scattered": (w, t) pseudo-random and uniform over the whole range,
//!   which visits the cold, water-rich corner where the inverse is hardest.
//!
//! Run: `cargo bench --no-default-features --bench kernel`.

use std::hint::black_box;
use std::time::Duration;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use meniscus::kernel::composition::{self, Composition};
use meniscus::kernel::{EthanolWater, Mixture, T_REF_C};

const N: usize = 1_000_000;

/// A % vol (0–100) expressed as the composition a point-by-point row converts.
type AbvCase = fn(f64) -> Composition;

/// w rising over 0–1 while t falls over 40 → −20 °C.
fn diagonal() -> (Vec<f64>, Vec<f64>) {
    let step = 1.0 / (N - 1) as f64;
    let w: Vec<f64> = (0..N).map(|i| i as f64 * step).collect();
    let t: Vec<f64> = (0..N).map(|i| 40.0 - 60.0 * i as f64 * step).collect();
    (w, t)
}

/// (w, t) uniform over the validity range, from a fixed xorshift sequence.
fn scattered() -> (Vec<f64>, Vec<f64>) {
    let mut x: u64 = 0x9E37_79B9_7F4A_7C15;
    let mut next = move || {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        (x >> 11) as f64 / (1u64 << 53) as f64
    };
    (0..N).map(|_| (next(), -20.0 + 60.0 * next())).unzip()
}

fn kernel(c: &mut Criterion) {
    let m = EthanolWater::new();
    let mut out = vec![0.0; N];
    let mut abv = vec![0.0; N];

    let mut g = c.benchmark_group("ethanol-water, 1e6 points (ms/iter = ns/point)");
    g.throughput(Throughput::Elements(N as u64));
    g.sample_size(10);
    g.measurement_time(Duration::from_secs(5));

    for (layout, (w, t)) in [("diagonal", diagonal()), ("scattered", scattered())] {
        let mut rho = vec![0.0; N];
        m.density_slice(&w, &t, &mut rho).unwrap();

        g.bench_function(format!("{layout}: density (density_slice)"), |b| {
            b.iter(|| {
                m.density_slice(black_box(&w), black_box(&t), &mut out)
                    .unwrap();
                black_box(&out);
            })
        });
        g.bench_function(format!("{layout}: drho_dw (drho_dw_slice)"), |b| {
            b.iter(|| {
                m.drho_dw_slice(black_box(&w), black_box(&t), &mut out)
                    .unwrap();
                black_box(&out);
            })
        });
        g.bench_function(format!("{layout}: inverse w (w_from_density_slice)"), |b| {
            b.iter(|| {
                m.w_from_density_slice(black_box(&rho), black_box(&t), &mut out)
                    .unwrap();
                black_box(&out);
            })
        });
        if layout == "diagonal" {
            g.bench_function("diagonal: density (point by point, checked)", |b| {
                b.iter(|| {
                    for ((o, &w), &t) in out.iter_mut().zip(black_box(&w)).zip(black_box(&t)) {
                        *o = m.density(w, t).unwrap();
                    }
                    black_box(&out);
                })
            });
            g.bench_function("diagonal: inverse w (point by point)", |b| {
                b.iter(|| {
                    for ((o, &r), &t) in out.iter_mut().zip(black_box(&rho)).zip(black_box(&t)) {
                        *o = m.w_from_density(r, t).unwrap();
                    }
                    black_box(&out);
                })
            });
            g.bench_function("diagonal: inverse to % vol at 20 °C (as the peer)", |b| {
                b.iter(|| {
                    m.w_from_density_slice(black_box(&rho), black_box(&t), &mut out)
                        .unwrap();
                    m.abv_slice(&out, T_REF_C, &mut abv).unwrap();
                    black_box(&abv);
                })
            });
        }

        // Not a timing: the results must be right, or the timings mean
        // nothing. The checksums compare with the NumPy peer's.
        m.w_from_density_slice(&rho, &t, &mut out).unwrap();
        let worst = out
            .iter()
            .zip(&w)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        assert!(worst <= 1e-10, "{layout}: inverse off by {worst:e}");
        let sum_rho: f64 = rho.iter().sum();
        let sum_abv: f64 = out
            .iter()
            .map(|&w| composition::abv(&m, w, T_REF_C).unwrap())
            .sum();
        eprintln!(
            "{layout}: checksum density {sum_rho:.6} abv {sum_abv:.6}; inverse worst |Δw| {worst:e}"
        );
    }
    // % vol → w one point at a time, as a scalar call from Lua or a sheet
    // formula makes it: at 20 °C (% vol), at 60 °F (proof) and at a
    // reference temperature with no table (15 °C, the bracketed solve).
    let step = 100.0 / (N - 1) as f64;
    let abv_in: Vec<f64> = (0..N).map(|i| i as f64 * step).collect();
    let cases: [(&str, AbvCase); 3] = [
        ("% vol at 20 °C -> w, point by point", Composition::abv),
        ("proof -> w, point by point", |a| {
            Composition::Proof(2.0 * a)
        }),
        ("% vol at 15 °C -> w, point by point", |a| {
            Composition::Abv {
                abv: a,
                t_ref: 15.0,
            }
        }),
    ];
    for (name, comp) in cases {
        g.bench_function(name, |b| {
            b.iter(|| {
                for (o, &a) in out.iter_mut().zip(black_box(&abv_in)) {
                    *o = m.mass_fraction(comp(a)).unwrap();
                }
                black_box(&out);
            })
        });
    }
    g.finish();
}

criterion_group!(benches, kernel);
criterion_main!(benches);
