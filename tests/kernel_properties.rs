//! Property tests of the kernel on the ethanol–water model: conversions
//! round-trip between every pair of bases, the inverse solve is accurate
//! everywhere, partial molar volumes obey Gibbs–Duhem, analytic derivatives
//! match finite differences, and no f64 input makes any pub function panic.

use meniscus::kernel::composition::{self, w_from_x, Composition};
use meniscus::kernel::hydrometer::{self, HydrometerScale};
use meniscus::kernel::model::Component;
use meniscus::kernel::{error, solve, uncertainty, volumetric};
use meniscus::kernel::{Error, EthanolWater, Mixture, T_PROOF_C, T_REF_C};
use proptest::prelude::*;

fn model() -> EthanolWater {
    EthanolWater::new()
}

/// Mass fraction over the whole validity range, ends included.
fn any_w() -> impl Strategy<Value = f64> {
    prop_oneof![1 => Just(0.0), 1 => Just(1.0), 20 => 0.0..=1.0f64]
}

/// Temperature over the whole validity range, ends included.
fn any_t() -> impl Strategy<Value = f64> {
    prop_oneof![1 => Just(-20.0), 1 => Just(40.0), 20 => -20.0..=40.0f64]
}

/// The bases a composition can be given in, each with the reference
/// temperature or measuring temperature it needs.
#[derive(Debug, Clone, Copy)]
enum Basis {
    W,
    Abm,
    X,
    AbvAt(f64),
    Proof,
    DensityAt(f64),
}

/// The composition of mass fraction `w` expressed in `basis`, computed from
/// the model's forward functions.
fn express(m: &EthanolWater, w: f64, basis: Basis) -> Composition {
    match basis {
        Basis::W => Composition::W(w),
        Basis::Abm => Composition::Abm(100.0 * w),
        Basis::X => Composition::X(m.x_from_w(w)),
        Basis::AbvAt(t_ref) => Composition::Abv {
            abv: m.abv_at(w, t_ref).unwrap(),
            t_ref,
        },
        Basis::Proof => Composition::Proof(m.strength(w).unwrap().proof),
        Basis::DensityAt(t) => Composition::Density {
            rho: m.density(w, t).unwrap(),
            t,
        },
    }
}

fn bases(t_other: f64, t_meas: f64) -> [Basis; 7] {
    [
        Basis::W,
        Basis::Abm,
        Basis::X,
        Basis::AbvAt(T_REF_C),
        Basis::AbvAt(t_other),
        Basis::Proof,
        Basis::DensityAt(t_meas),
    ]
}

/// 512 cases per property unless PROPTEST_CASES asks for more (stress runs).
fn config() -> ProptestConfig {
    let cases = std::env::var("PROPTEST_CASES")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(512);
    ProptestConfig::with_cases(cases)
}

proptest! {
    #![proptest_config(config())]

    /// From basis A to w, from w to basis B, from B back to w: every pair.
    #[test]
    fn round_trip_between_every_pair_of_bases(w in any_w(), t_other in any_t(), t_meas in any_t()) {
        let m = model();
        let all = bases(t_other, t_meas);
        for a in all {
            let wa = m.mass_fraction(express(&m, w, a)).unwrap();
            prop_assert!((wa - w).abs() <= 1e-10, "{a:?}: w {w} → {wa}");
            for b in all {
                let wb = m.mass_fraction(express(&m, wa, b)).unwrap();
                prop_assert!((wb - w).abs() <= 1e-10, "{a:?} → {b:?}: w {w} → {wb}");
            }
        }
        // convert() agrees with the per-basis conversions.
        let s = m.convert(Composition::W(w)).unwrap();
        prop_assert!((s.abv - m.abv_at(w, T_REF_C).unwrap()).abs() <= 1e-12);
        prop_assert!((s.proof - 2.0 * m.abv_at(w, T_PROOF_C).unwrap()).abs() <= 1e-12);
    }

    /// The density solve recovers w to 1e-10 from any density the model
    /// produces.
    #[test]
    fn inverse_solve_recovers_w(w in any_w(), t in any_t()) {
        let m = model();
        let rho = m.density(w, t).unwrap();
        let back = m.w_from_density(rho, t).unwrap();
        prop_assert!((back - w).abs() <= 1e-10, "w {w} at {t} °C → {back}");
    }

    /// x₁ dV̄₁/dx + x₂ dV̄₂/dx = 0, derivatives by central differences in x.
    #[test]
    fn gibbs_duhem(x in 1e-3..=0.999f64, t in any_t()) {
        let m = model();
        let [m1, m2] = [m.components()[0].molar_mass, m.components()[1].molar_mass];
        // Five-point central differences (error O(h⁴)): near x = 1 the
        // partial molar volume of water curves steeply and a three-point
        // difference leaves a truncation error above the tolerance.
        let h = 1e-4;
        let pmv = |x: f64| m.partial_molar_volumes(w_from_x(x, m1, m2), t).unwrap();
        let [a, b, c, d] = [pmv(x - 2.0 * h), pmv(x - h), pmv(x + h), pmv(x + 2.0 * h)];
        let diff = |i: usize| (a[i] - 8.0 * b[i] + 8.0 * c[i] - d[i]) / (12.0 * h);
        let d1 = x * diff(0);
        let d2 = (1.0 - x) * diff(1);
        // Relative to the size of the terms, with an absolute floor for
        // where both terms pass through zero (the extremum of V̄₁ near
        // x ≈ 0.06, and one near x ≈ 0.996 at low t): there only rounding
        // is left, ~1e-9 kg/m³ noise in ∂ρ/∂w of a degree-11 polynomial
        // with 1e5-size coefficients, amplified ~1e4 by the difference
        // quotient — up to ~1e-7 cm³/mol seen.
        let scale = d1.abs() + d2.abs();
        prop_assert!((d1 + d2).abs() <= 1e-6 * scale + 1e-6,
            "x {x}, t {t}: {d1} + {d2} = {}", d1 + d2);
    }

    /// Analytic ∂ρ/∂w and ∂ρ/∂t against central differences.
    #[test]
    fn analytic_derivatives_match_finite_differences(w in any_w(), t in any_t()) {
        let m = model();
        // The polynomial is defined just outside [0, 1] and [−20, 40], so the
        // unchecked rho can be sampled across the ends.
        let hw = 1e-5;
        let fd_w = (m.rho(w + hw, t) - m.rho(w - hw, t)) / (2.0 * hw);
        let an_w = m.drho_dw(w, t);
        prop_assert!((fd_w - an_w).abs() <= 1e-6 * an_w.abs(),
            "∂ρ/∂w at w {w}, t {t}: analytic {an_w}, difference {fd_w}");
        let ht = 1e-4;
        let fd_t = (m.rho(w, t + ht) - m.rho(w, t - ht)) / (2.0 * ht);
        let an_t = m.drho_dt(w, t);
        // ∂ρ/∂t crosses zero near water's density maximum (≈4 °C), so a
        // small absolute floor backs the relative tolerance.
        prop_assert!((fd_t - an_t).abs() <= 1e-6 * an_t.abs() + 1e-8,
            "∂ρ/∂t at w {w}, t {t}: analytic {an_t}, difference {fd_t}");
        // The combined evaluations agree with the single ones.
        let (r, dw, dt) = EthanolWater::eval(w, t);
        prop_assert!((r - m.rho(w, t)).abs() <= 1e-9);
        prop_assert!((dw - an_w).abs() <= 1e-9 * an_w.abs().max(1.0));
        prop_assert!((dt - an_t).abs() <= 1e-12);
        let (r2, dw2) = m.rho_dw(w, t);
        prop_assert!((r2 - r).abs() <= 1e-9 && (dw2 - an_w).abs() <= 1e-9 * an_w.abs().max(1.0));
    }

    /// A % vol hydrometer read at its calibration temperature reads true.
    #[test]
    fn abv_hydrometer_at_20c_returns_the_reading(reading in 0.0..=100.0f64, alpha in 0.0..=5e-5f64) {
        let m = model();
        let s = m.hydrometer(HydrometerScale::AbvAt20 { alpha }, reading, T_REF_C).unwrap();
        prop_assert!((s.abv - reading).abs() <= 1e-8, "{reading} → {}", s.abv);
    }

    /// A proof hydrometer read at 60 °F reads true.
    #[test]
    fn proof_hydrometer_at_60f_returns_the_reading(reading in 0.0..=200.0f64) {
        let m = model();
        let s = m.hydrometer(HydrometerScale::proof(), reading, T_PROOF_C).unwrap();
        prop_assert!((s.proof - reading).abs() <= 1e-8, "{reading} → {}", s.proof);
    }

    /// Away from the calibration temperature the reading is corrected by the
    /// liquid's and the glass's expansion: a warm sample reads high, so the
    /// true strength is below the reading (for the usual strengths, where
    /// the liquid expands faster than glass).
    #[test]
    fn warm_hydrometer_reading_corrects_downwards(reading in 5.0..=95.0f64, t in 25.0..=40.0f64) {
        let m = model();
        let s = m.hydrometer(HydrometerScale::abv(), reading, t).unwrap();
        prop_assert!(s.abv < reading, "{reading} at {t} °C → {}", s.abv);
    }

    /// t1 → t2 → t1 gives the volume back.
    #[test]
    fn volume_at_round_trip(v in 1e-6..=1e6f64, w in any_w(), t1 in any_t(), t2 in any_t()) {
        let m = model();
        let v2 = m.volume_at(v, w, t1, t2).unwrap();
        let back = m.volume_at(v2, w, t2, t1).unwrap();
        prop_assert!((back - v).abs() <= 1e-12 * v, "{v} → {v2} → {back}");
        // Mass is conserved: ρ₁ V₁ = ρ₂ V₂.
        let (r1, r2) = (m.density(w, t1).unwrap(), m.density(w, t2).unwrap());
        prop_assert!((r1 * v - r2 * v2).abs() <= 1e-12 * r1 * v);
    }

    /// u(w) from the analytic propagation matches a finite-difference
    /// propagation through the solve itself.
    #[test]
    fn uncertainty_matches_finite_difference_propagation(
        w in 0.01..=0.99f64, t in -19.0..=39.0f64, u_rho in 0.0..=0.5f64, u_t in 0.0..=0.5f64,
    ) {
        let m = model();
        let rho = m.density(w, t).unwrap();
        let (_, u) = m.strength_with_uncertainty(rho, t, u_rho, u_t).unwrap();
        let (hr, ht) = (1e-4, 1e-4);
        let dw_drho = (m.w_from_density(rho + hr, t).unwrap() - m.w_from_density(rho - hr, t).unwrap()) / (2.0 * hr);
        let dw_dt = (m.w_from_density(rho, t + ht).unwrap() - m.w_from_density(rho, t - ht).unwrap()) / (2.0 * ht);
        let fd = ((dw_drho * u_rho).powi(2) + (dw_dt * u_t).powi(2)).sqrt();
        prop_assert!((u.w - fd).abs() <= 1e-5 * fd + 1e-14, "u(w) {} vs {fd}", u.w);
        prop_assert!((u.abm - 100.0 * u.w).abs() <= 1e-12 * u.abm.max(1.0));
    }

    /// Every pub kernel function taking f64 returns Ok with finite results
    /// or a proper Err for any f64 at all; the unchecked ones just return.
    #[test]
    fn no_panic_for_any_f64(a in any_f64(), b in any_f64(), c in any_f64(), d in any_f64()) {
        exercise_everything(a, b, c, d)?;
    }
}

/// Any f64, weighted towards the awkward ones.
fn any_f64() -> impl Strategy<Value = f64> {
    prop_oneof![
        3 => any::<f64>(),
        1 => Just(f64::NAN),
        1 => Just(f64::INFINITY),
        1 => Just(f64::NEG_INFINITY),
        1 => Just(f64::MAX),
        1 => Just(f64::MIN),
        1 => Just(f64::MIN_POSITIVE),
        1 => Just(-0.0),
        1 => Just(0.0),
        1 => Just(1e300),
        1 => Just(-1e-300),
        2 => -50.0..=250.0f64,
        2 => 0.0..=1.0f64,
        2 => 700.0..=1100.0f64,
    ]
}

fn ok_finite(what: &str, r: Result<f64, Error>) -> Result<(), TestCaseError> {
    if let Ok(v) = r {
        prop_assert!(v.is_finite(), "{what} returned Ok({v})");
    }
    Ok(())
}

fn ok_all_finite(what: &str, r: Result<Vec<f64>, Error>) -> Result<(), TestCaseError> {
    if let Ok(v) = r {
        prop_assert!(v.iter().all(|x| x.is_finite()), "{what} returned Ok({v:?})");
    }
    Ok(())
}

fn strength_vec(s: meniscus::kernel::Strength) -> Vec<f64> {
    vec![s.w, s.abm, s.x, s.abv, s.proof]
}

fn exercise_everything(a: f64, b: f64, c: f64, d: f64) -> Result<(), TestCaseError> {
    let m = model();
    // error helpers
    ok_finite("finite", error::finite("q", a))?;
    ok_finite("in_range", error::in_range("q", a, b, c, ""))?;
    ok_finite("positive", error::positive("q", a, ""))?;

    // unchecked numerics: must simply return
    let _ = m.rho(a, b);
    let _ = m.drho_dw(a, b);
    let _ = m.drho_dt(a, b);
    let _ = m.rho_dw(a, b);
    let _ = m.guess_w_from_density(a, b);
    let _ = m.guess_w_from_abv(a, b);
    let _ = solve::polish_increasing(|x: f64| (x * x * x + x, 3.0 * x * x + 1.0), a, b, c, d, 3);
    let _ = m.x_from_w(a);
    let _ = EthanolWater::eval(a, b);
    let _ = composition::x_from_w(a, b, c);
    let _ = composition::w_from_x(a, b, c);
    let _ = composition::dx_dw(a, b, c);
    let _ = volumetric::mean_molar_mass(a, b, c);
    let _ = volumetric::pmv_from_rho(a, b, c, d, a);
    let _ = Component::new("c", a);
    let _ = Composition::abv(a);

    // checked trait methods
    ok_finite("check_w", m.check_w(a))?;
    ok_finite("check_t", m.check_t(a))?;
    ok_finite("density", m.density(a, b))?;
    ok_finite("pure_density 0", m.pure_density(0, a))?;
    ok_finite("pure_density 1", m.pure_density(1, a))?;
    prop_assert!(m.pure_density(2, 20.0).is_err());
    ok_finite("abv_at", m.abv_at(a, b))?;
    ok_finite("w_from_density", m.w_from_density(a, b))?;
    ok_finite("molar_volume", m.molar_volume(a, b))?;
    ok_finite("excess_molar_volume", m.excess_molar_volume(a, b))?;
    ok_finite("expansion_coefficient", m.expansion_coefficient(a, b))?;
    ok_finite("volume_at", m.volume_at(a, b, c, d))?;
    ok_finite(
        "volume_correction_factor",
        m.volume_correction_factor(a, b, c),
    )?;
    ok_all_finite(
        "partial_molar_volumes",
        m.partial_molar_volumes(a, b).map(Vec::from),
    )?;
    ok_all_finite(
        "partial_molar_volumes_infinite_dilution",
        m.partial_molar_volumes_infinite_dilution(a).map(Vec::from),
    )?;
    ok_all_finite("pure_molar_volumes", m.pure_molar_volumes(a).map(Vec::from))?;
    ok_all_finite(
        "apparent_molar_volumes",
        m.apparent_molar_volumes(a, b).map(Vec::from),
    )?;
    ok_all_finite("strength", m.strength(a).map(strength_vec))?;
    ok_all_finite(
        "strength_from_density",
        m.strength_from_density(a, b).map(strength_vec),
    )?;
    ok_all_finite(
        "strength_with_uncertainty",
        m.strength_with_uncertainty(a, b, c, d).map(|(s, u)| {
            let mut v = strength_vec(s);
            v.extend([u.w, u.abm, u.x, u.abv, u.proof]);
            v
        }),
    )?;
    for comp in [
        Composition::W(a),
        Composition::Abm(a),
        Composition::X(a),
        Composition::Abv { abv: a, t_ref: b },
        Composition::Proof(a),
        Composition::Density { rho: a, t: b },
    ] {
        ok_finite("mass_fraction", m.mass_fraction(comp))?;
        ok_finite("density_of", m.density_of(comp, c))?;
        ok_all_finite("convert", m.convert(comp).map(strength_vec))?;
    }
    for scale in [
        HydrometerScale::AbvAt20 { alpha: c },
        HydrometerScale::ProofAt60F { alpha: c },
    ] {
        ok_all_finite("hydrometer", m.hydrometer(scale, a, b).map(strength_vec))?;
        ok_all_finite(
            "hydrometer::true_strength",
            hydrometer::true_strength(&m, scale, a, b).map(strength_vec),
        )?;
    }
    for (v1, v2) in [(a, b), (a.abs(), b.abs())] {
        for r in [m.mix_volumes(v1, v2, c), m.mix_masses(v1, v2, c)] {
            ok_all_finite(
                "mixing",
                r.map(|x| vec![x.w, x.mass, x.volume, x.volume_sum, x.contraction]),
            )?;
        }
    }

    // bulk functions, on a chunk and a half of wild points
    let xs: Vec<f64> = [a, b, c, d].iter().cycle().take(97).copied().collect();
    let ys: Vec<f64> = [b, c, d, a, 20.0]
        .iter()
        .cycle()
        .take(97)
        .copied()
        .collect();
    let mut out = vec![0.0; 97];
    for r in [
        m.density_slice(&xs, &ys, &mut out),
        m.drho_dw_slice(&xs, &ys, &mut out),
        m.w_from_density_slice(&xs, &ys, &mut out),
        m.abv_slice(&xs, c, &mut out),
    ] {
        if r.is_ok() {
            prop_assert!(out.iter().all(|v| v.is_finite()), "bulk Ok with {out:?}");
        }
    }

    // pub free functions
    ok_finite("composition::abv", composition::abv(&m, a, b))?;
    ok_finite("composition::dabv_dw", composition::dabv_dw(&m, a, b))?;
    ok_all_finite(
        "composition::strength",
        composition::strength(&m, a).map(strength_vec),
    )?;
    ok_finite(
        "composition::to_w",
        composition::to_w(&m, Composition::Abv { abv: a, t_ref: b }),
    )?;
    ok_finite(
        "volumetric::molar_volume",
        volumetric::molar_volume(&m, a, b),
    )?;
    ok_all_finite(
        "volumetric::partial_molar_volumes",
        volumetric::partial_molar_volumes(&m, a, b).map(Vec::from),
    )?;
    ok_finite(
        "volumetric::excess_molar_volume",
        volumetric::excess_molar_volume(&m, a, b),
    )?;
    ok_all_finite(
        "volumetric::apparent_molar_volumes",
        volumetric::apparent_molar_volumes(&m, a, b).map(Vec::from),
    )?;
    ok_finite("solve::w_from_density", solve::w_from_density(&m, a, b))?;
    ok_all_finite(
        "uncertainty::strength_from_density",
        uncertainty::strength_from_density(&m, a, b, c, d).map(|(s, _)| strength_vec(s)),
    )?;
    // The generic solver, with a well-behaved function and wild arguments.
    let cube = |x: f64| (x * x * x + x, 3.0 * x * x + 1.0);
    ok_finite(
        "solve_increasing",
        solve::solve_increasing(cube, a, b, c, d, "test solve"),
    )?;
    ok_finite(
        "solve_increasing (sane bracket)",
        solve::solve_increasing(cube, a, -2.0, 2.0, d, "test solve"),
    )?;
    Ok(())
}

// ---- deterministic checks ---------------------------------------------------

/// The mass fraction whose % vol at `t_ref` is `abv`, by the bracketed
/// solve alone (no model guess), for checking the fast path against.
fn w_from_abv_bracketed(m: &EthanolWater, abv: f64, t_ref: f64) -> f64 {
    let rho1 = m.pure_density(0, t_ref).unwrap();
    let f = |w: f64| {
        let (r, dr) = m.rho_dw(w, t_ref);
        (w * r, r + w * dr)
    };
    solve::solve_increasing(f, abv / 100.0 * rho1, 0.0, 1.0, 0.5, "test % vol").unwrap()
}

#[test]
fn abv_guess_tables_are_close_and_the_solve_is_exact() {
    let m = model();
    for t_ref in [T_REF_C, T_PROOF_C] {
        let (mut worst_guess, mut worst_solve) = (0.0f64, 0.0f64);
        for i in 0..=20_000 {
            let abv = f64::from(i) * 5e-3;
            let exact = w_from_abv_bracketed(&m, abv, t_ref);
            let guess = m.guess_w_from_abv(abv, t_ref).unwrap();
            worst_guess = worst_guess.max((guess - exact).abs());
            let w = m.mass_fraction(Composition::Abv { abv, t_ref }).unwrap();
            worst_solve = worst_solve.max((w - exact).abs());
        }
        // Close enough that Newton settles in two steps (see `ABV_NS`).
        assert!(
            worst_guess <= 1e-7,
            "guess at {t_ref} °C off by {worst_guess:e}"
        );
        assert!(
            worst_solve <= 1e-12,
            "solve at {t_ref} °C off by {worst_solve:e}"
        );
    }
    // Other reference temperatures take the bracketed solve.
    assert_eq!(m.guess_w_from_abv(50.0, 15.0), None);
    let w = m
        .mass_fraction(Composition::Abv {
            abv: 50.0,
            t_ref: 15.0,
        })
        .unwrap();
    assert!((w - w_from_abv_bracketed(&m, 50.0, 15.0)).abs() <= 1e-12);
    // The ends are exact.
    assert_eq!(m.mass_fraction(Composition::abv(0.0)).unwrap(), 0.0);
    assert_eq!(m.mass_fraction(Composition::abv(100.0)).unwrap(), 1.0);
    assert_eq!(m.mass_fraction(Composition::Proof(200.0)).unwrap(), 1.0);
}

#[test]
fn inverse_solve_to_1e_10_on_a_grid() {
    let m = model();
    let mut worst = 0.0f64;
    for it in 0..=120 {
        let t = -20.0 + 0.5 * f64::from(it);
        for iw in 0..=1000 {
            let w = f64::from(iw) * 1e-3;
            let rho = m.density(w, t).unwrap();
            let back = m.w_from_density(rho, t).unwrap();
            worst = worst.max((back - w).abs());
        }
    }
    assert!(worst <= 1e-10, "largest error in w: {worst:e}");
}

#[test]
fn unreachable_density_names_the_range() {
    let m = model();
    for rho in [1100.0, 700.0, 1000.5] {
        let err = m.w_from_density(rho, 20.0).unwrap_err();
        match &err {
            Error::Unreachable { min, max, t, .. } => {
                assert!((min - 789.2391).abs() < 1e-3, "min {min}");
                assert!((max - 998.2012).abs() < 1e-3, "max {max}");
                assert_eq!(*t, 20.0);
            }
            other => panic!("expected Unreachable, got {other:?}"),
        }
        let msg = err.to_string();
        assert!(
            msg.contains("789.2391") && msg.contains("998.2012"),
            "{msg}"
        );
        assert!(msg.contains(&format!("{rho}")), "{msg}");
    }
    // The ends themselves are reachable.
    assert_eq!(
        m.w_from_density(m.density(0.0, 20.0).unwrap(), 20.0),
        Ok(0.0)
    );
    assert_eq!(
        m.w_from_density(m.density(1.0, 20.0).unwrap(), 20.0),
        Ok(1.0)
    );
}

#[test]
fn out_of_range_messages_quote_value_and_range() {
    let m = model();
    let msg = m.density(0.5, 55.0).unwrap_err().to_string();
    assert_eq!(
        msg,
        "temperature t = 55 °C is outside the valid range -20 to 40 °C"
    );
    let msg = m.density(1.5, 20.0).unwrap_err().to_string();
    assert_eq!(
        msg,
        "mass fraction w = 1.5 is outside the valid range 0 to 1"
    );
    let msg = m.w_from_density(f64::NAN, 20.0).unwrap_err().to_string();
    assert_eq!(msg, "density must be a finite number, got NaN");
}

#[test]
fn volume_at_rejects_bad_volumes() {
    let m = model();
    assert!(m.volume_at(f64::NAN, 0.4, 20.0, 30.0).is_err());
    assert!(m.volume_at(-1.0, 0.4, 20.0, 30.0).is_err());
    assert!(m.volume_at(f64::MAX, 0.4, 0.0, 40.0).is_err());
    assert!(m.volume_at(1.0, 0.4, 20.0, 30.0).unwrap() > 1.0);
}

// ---- bulk (slice) functions --------------------------------------------------

/// Up to 300 points over the validity range.
fn any_points() -> impl Strategy<Value = Vec<(f64, f64)>> {
    proptest::collection::vec((any_w(), any_t()), 0..300)
}

proptest! {
    #![proptest_config(config())]

    /// The slice functions give bit for bit the point functions' values,
    /// whichever vector width the CPU runs them at.
    #[test]
    fn forward_slices_equal_point_values(points in any_points(), t_ref in any_t()) {
        let m = model();
        let (w, t): (Vec<f64>, Vec<f64>) = points.into_iter().unzip();
        let mut rho = vec![0.0; w.len()];
        let mut slope = vec![0.0; w.len()];
        let mut abv = vec![0.0; w.len()];
        m.density_slice(&w, &t, &mut rho).unwrap();
        m.drho_dw_slice(&w, &t, &mut slope).unwrap();
        m.abv_slice(&w, t_ref, &mut abv).unwrap();
        for i in 0..w.len() {
            prop_assert_eq!(rho[i].to_bits(), m.rho(w[i], t[i]).to_bits(), "density at {}", i);
            prop_assert_eq!(slope[i].to_bits(), m.drho_dw(w[i], t[i]).to_bits(), "slope at {}", i);
            prop_assert_eq!(abv[i].to_bits(), m.abv_at(w[i], t_ref).unwrap().to_bits(), "% vol at {}", i);
        }
    }

    /// The bulk density solve is as accurate as the point solve.
    #[test]
    fn inverse_slice_recovers_w(points in any_points()) {
        let m = model();
        let (w, t): (Vec<f64>, Vec<f64>) = points.into_iter().unzip();
        let mut rho = vec![0.0; w.len()];
        m.density_slice(&w, &t, &mut rho).unwrap();
        let mut back = vec![0.0; w.len()];
        m.w_from_density_slice(&rho, &t, &mut back).unwrap();
        for i in 0..w.len() {
            prop_assert!((back[i] - w[i]).abs() <= 1e-10, "point {}: w {} → {}", i, w[i], back[i]);
            let one = m.w_from_density(rho[i], t[i]).unwrap();
            prop_assert!((back[i] - one).abs() <= 1e-10, "point {}: slice {} vs point {}", i, back[i], one);
        }
    }
}

#[test]
fn inverse_slice_to_1e_10_on_a_grid() {
    // Includes the cold, water-rich corner where ρ is flattest in w and the
    // table guess is poorest, so the careful fallback is exercised too.
    let m = model();
    let (mut w, mut t) = (Vec::new(), Vec::new());
    for it in 0..=120 {
        for iw in 0..=1000 {
            t.push(-20.0 + 0.5 * f64::from(it));
            w.push(f64::from(iw) * 1e-3);
        }
    }
    let mut rho = vec![0.0; w.len()];
    m.density_slice(&w, &t, &mut rho).unwrap();
    let mut back = vec![0.0; w.len()];
    m.w_from_density_slice(&rho, &t, &mut back).unwrap();
    let worst = back
        .iter()
        .zip(&w)
        .map(|(a, b)| (a - b).abs())
        .fold(0.0, f64::max);
    assert!(worst <= 1e-10, "largest error in w: {worst:e}");
    // Pure components come back exactly, as from the point solve.
    for (i, &wi) in w.iter().enumerate() {
        if wi == 0.0 || wi == 1.0 {
            assert_eq!(back[i], wi, "pure component at {} °C", t[i]);
        }
    }
}

#[test]
fn pure_component_slopes_allow_the_end_snap() {
    // The density solve returns a pure component when the density is within
    // 1e-12 relative (~1e-9 kg/m³) of it; that stays below 1e-10 in w only
    // if |∂ρ/∂w| > 10 at both ends.
    let m = model();
    for it in 0..=600 {
        let t = -20.0 + 0.1 * f64::from(it);
        for w in [0.0, 1.0] {
            let d = m.drho_dw(w, t);
            assert!(d < -10.0, "∂ρ/∂w = {d} at w = {w}, t = {t}");
        }
    }
}

#[test]
fn slice_errors_name_the_point() {
    let m = model();
    let w = [0.1, 0.2, 0.3, 0.4];
    let t = [20.0, 20.0, 55.0, 20.0];
    let mut out = [0.0; 4];
    match m.density_slice(&w, &t, &mut out) {
        Err(Error::AtPoint { index: 2, source }) => {
            assert!(matches!(*source, Error::OutOfRange { .. }), "{source:?}")
        }
        other => panic!("expected a range error at point 2, got {other:?}"),
    }
    assert_eq!(out, [0.0; 4], "nothing written on a bad input");
    let msg = m.density_slice(&w, &t, &mut out).unwrap_err().to_string();
    assert_eq!(
        msg,
        "point 2: temperature t = 55 °C is outside the valid range -20 to 40 °C"
    );

    // The bulk solve reports the first bad point and keeps the ones before.
    let n = 200;
    let t = vec![20.0; n];
    let mut rho = vec![900.0; n];
    rho[150] = 1200.0;
    rho[170] = f64::NAN;
    let mut out = vec![-1.0; n];
    match m.w_from_density_slice(&rho, &t, &mut out) {
        Err(Error::AtPoint { index: 150, source }) => {
            assert!(matches!(*source, Error::Unreachable { .. }), "{source:?}")
        }
        other => panic!("expected an unreachable density at point 150, got {other:?}"),
    }
    let w900 = m.w_from_density(900.0, 20.0).unwrap();
    assert!(out[..150].iter().all(|&w| (w - w900).abs() <= 1e-10));

    // % vol in bulk: a bad mass fraction or reference temperature.
    let mut out = [0.0; 3];
    match m.abv_slice(&[0.5, 1.5, 0.2], 20.0, &mut out) {
        Err(Error::AtPoint { index: 1, .. }) => {}
        other => panic!("expected a range error at point 1, got {other:?}"),
    }
    assert!(matches!(
        m.abv_slice(&[0.5; 3], 60.0, &mut out),
        Err(Error::OutOfRange { .. })
    ));
    // Longer than the internal buffer of reference temperatures.
    let w: Vec<f64> = (0..1000).map(|i| f64::from(i) / 999.0).collect();
    let mut abv = vec![0.0; 1000];
    m.abv_slice(&w, 20.0, &mut abv).unwrap();
    assert_eq!(abv[999], 100.0);
    assert_eq!(abv[500], m.abv_at(w[500], 20.0).unwrap());

    // Lengths must agree.
    let mut short = [0.0; 3];
    assert!(matches!(
        m.density_slice(&[0.1; 4], &[20.0; 4], &mut short),
        Err(Error::Invalid(_))
    ));
    assert!(matches!(
        m.w_from_density_slice(&[900.0; 4], &[20.0; 3], &mut [0.0; 4]),
        Err(Error::Invalid(_))
    ));
}
