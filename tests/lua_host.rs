//! The Lua host through its public interface ([`Host`]): the mixture API
//! checked against the kernel called directly, bulk evaluation, vectors,
//! help, display, completion, and every applicable row of the reliability
//! checklist (sandbox, limits, hostile input, file access).

#![cfg(feature = "lua")]

use std::path::PathBuf;
use std::sync::atomic::Ordering;
use std::time::{Duration, Instant};

use meniscus::kernel::{Composition, EthanolWater, HydrometerScale, Mixture};
use meniscus::lua::{Completeness, Host, HostOptions};
use mlua::{Table, Value};

mod common;
use common::ethanol_water_host as host_with;
use common::{err, eval, fails_with, lua_str, num, nums, table};

fn host() -> Host {
    host_with(HostOptions {
        timeout: Some(Duration::from_secs(20)),
        ..HostOptions::default()
    })
}

fn kernel() -> EthanolWater {
    EthanolWater::new()
}

// ---- the mixture API against the kernel ---------------------------------

#[test]
fn density_matches_the_kernel() {
    let h = host();
    let k = kernel();
    let got = num(&h, "m:density{abv = 40, t = 15}");
    let want = k.density_of(Composition::abv(40.0), 15.0).unwrap();
    assert_eq!(got, want);
    let got = num(&h, "m:density{w = 0.5}");
    assert_eq!(got, k.density(0.5, 20.0).unwrap());
    let got = num(&h, "m:density{proof = 80, t = 10}");
    assert_eq!(got, k.density_of(Composition::Proof(80.0), 10.0).unwrap());
    let got = num(&h, "m:density{abm = 30, t = 25}");
    assert_eq!(got, k.density_of(Composition::Abm(30.0), 25.0).unwrap());
    let got = num(&h, "m:density{x = 0.2}");
    assert_eq!(got, k.density_of(Composition::X(0.2), 20.0).unwrap());
    let got = num(&h, "m:density{abv = 40, t_ref = 15, t = 15}");
    let want = k
        .density_of(
            Composition::Abv {
                abv: 40.0,
                t_ref: 15.0,
            },
            15.0,
        )
        .unwrap();
    assert_eq!(got, want);
}

#[test]
fn strength_from_density_matches_the_kernel() {
    let h = host();
    let s = kernel().strength_from_density(948.05, 20.0).unwrap();
    let t = table(&h, "m:strength{density = 948.05, t = 20}");
    for (k, v) in [
        ("w", s.w),
        ("abm", s.abm),
        ("x", s.x),
        ("abv", s.abv),
        ("proof", s.proof),
    ] {
        assert_eq!(t.get::<f64>(k).unwrap(), v, "{k}");
    }
    assert!(t.get::<Value>("u_w").unwrap().is_nil());
}

#[test]
fn convert_matches_the_kernel() {
    let h = host();
    let s = kernel().convert(Composition::abv(40.0)).unwrap();
    let t = table(&h, "m:convert{abv = 40}");
    for (k, v) in [
        ("w", s.w),
        ("abm", s.abm),
        ("x", s.x),
        ("abv", s.abv),
        ("proof", s.proof),
    ] {
        assert_eq!(t.get::<f64>(k).unwrap(), v, "{k}");
    }
    let t = table(&h, "m:strength{proof = 100}");
    let s = kernel().convert(Composition::Proof(100.0)).unwrap();
    assert_eq!(t.get::<f64>("abv").unwrap(), s.abv);
}

#[test]
fn uncertainty_fields_match_the_kernel() {
    let h = host();
    let (s, u) = kernel()
        .strength_with_uncertainty(948.05, 20.0, 0.05, 0.1)
        .unwrap();
    let t = table(
        &h,
        "m:strength{density = 948.05, t = 20, u_density = 0.05, u_t = 0.1}",
    );
    assert_eq!(t.get::<f64>("abv").unwrap(), s.abv);
    for (k, v) in [
        ("u_w", u.w),
        ("u_abm", u.abm),
        ("u_x", u.x),
        ("u_abv", u.abv),
        ("u_proof", u.proof),
    ] {
        assert_eq!(t.get::<f64>(k).unwrap(), v, "{k}");
    }
}

#[test]
fn hydrometer_readings_match_the_kernel() {
    let h = host();
    let k = kernel();
    let s = k.hydrometer(HydrometerScale::abv(), 41.2, 24.0).unwrap();
    let t = table(&h, "m:hydrometer{abv = 41.2, t = 24}");
    assert_eq!(t.get::<f64>("abv").unwrap(), s.abv);
    assert_eq!(t.get::<f64>("w").unwrap(), s.w);
    let s = k.hydrometer(HydrometerScale::proof(), 193.0, 23.9).unwrap();
    let t = table(&h, "m:hydrometer{proof = 193, t = 23.9}");
    assert_eq!(t.get::<f64>("proof").unwrap(), s.proof);
    let s = k
        .hydrometer(HydrometerScale::AbvAt20 { alpha: 10e-6 }, 41.2, 24.0)
        .unwrap();
    let t = table(&h, "m:hydrometer{abv = 41.2, t = 24, alpha = 10e-6}");
    assert_eq!(t.get::<f64>("abv").unwrap(), s.abv);
}

#[test]
fn volumetric_properties_match_the_kernel() {
    let h = host();
    let k = kernel();
    let w = k.mass_fraction(Composition::abv(40.0)).unwrap();
    assert_eq!(
        num(&h, "m:molar_volume{abv = 40, t = 25}"),
        k.molar_volume(w, 25.0).unwrap()
    );
    let pmv = k.partial_molar_volumes(w, 25.0).unwrap();
    assert_eq!(nums(&h, "m:pmv{abv = 40, t = 25}"), pmv.to_vec());
    assert_eq!(
        num(&h, "m:excess_volume{abv = 40, t = 25}"),
        k.excess_molar_volume(w, 25.0).unwrap()
    );
    let app = k.apparent_molar_volumes(w, 25.0).unwrap();
    assert_eq!(
        nums(&h, "m:apparent_volume{abv = 40, t = 25}"),
        app.to_vec()
    );
    assert_eq!(
        num(&h, "m:expansion{abv = 40, t = 25}"),
        k.expansion_coefficient(w, 25.0).unwrap()
    );
    assert_eq!(
        num(
            &h,
            "m:volume_at{volume = 1000, abv = 40, from = 25, to = 20}"
        ),
        k.volume_at(1000.0, w, 25.0, 20.0).unwrap()
    );
    // From a density measured at 25 °C: the composition is solved first.
    let wd = k.w_from_density(940.0, 25.0).unwrap();
    assert_eq!(
        num(&h, "m:molar_volume{density = 940, t = 25}"),
        k.molar_volume(wd, 25.0).unwrap()
    );
}

#[test]
fn mixing_matches_the_kernel() {
    let h = host();
    let k = kernel();
    let r = k.mix_volumes(52.0, 48.0, 20.0).unwrap();
    let t = table(&h, "m:mix{v1 = 52, v2 = 48, t = 20}");
    assert_eq!(t.get::<f64>("volume").unwrap(), r.volume);
    assert_eq!(t.get::<f64>("contraction").unwrap(), r.contraction);
    assert_eq!(t.get::<f64>("w").unwrap(), r.w);
    assert_eq!(t.get::<f64>("abv").unwrap(), k.abv_at(r.w, 20.0).unwrap());
    assert!(r.contraction > 0.0, "ethanol and water contract on mixing");
    let r = k.mix_masses(40.0, 60.0, 15.0).unwrap();
    let t = table(&h, "m:mix{m1 = 40, m2 = 60, t = 15}");
    assert_eq!(t.get::<f64>("volume").unwrap(), r.volume);
}

#[test]
fn components_validity_and_name() {
    let h = host();
    let k = kernel();
    let c = table(&h, "m:components()");
    let first: Table = c.get(1).unwrap();
    assert_eq!(first.get::<String>("name").unwrap(), k.components()[0].name);
    assert_eq!(
        first.get::<f64>("molar_mass").unwrap(),
        k.components()[0].molar_mass
    );
    let v = table(&h, "m:validity()");
    assert_eq!(v.get::<f64>("t_max").unwrap(), k.validity().t_max);
    let name = eval(&h, "m:name()");
    assert_eq!(
        name.iter().next().unwrap().to_string().unwrap(),
        k.name().to_string()
    );
}

#[test]
fn mixture_userdata_wraps_any_model() {
    let h = host();
    let model: std::sync::Arc<dyn Mixture> = std::sync::Arc::new(EthanolWater::new());
    let ud = meniscus::lua::mixture_userdata(h.lua(), model).unwrap();
    h.lua().globals().set("other", ud).unwrap();
    assert_eq!(
        num(&h, "other:density{w = 0.3}"),
        num(&h, "m:density{w = 0.3}")
    );
}

// ---- bulk evaluation ----------------------------------------------------

#[test]
fn bulk_over_a_lua_table_gives_a_vector() {
    let h = host();
    let k = kernel();
    eval(&h, "d = m:density{abv = {0, 20, 40, 60}, t = 15}");
    assert_eq!(num(&h, "#d"), 4.0);
    for (i, abv) in [0.0, 20.0, 40.0, 60.0].iter().enumerate() {
        let want = k.density_of(Composition::abv(*abv), 15.0).unwrap();
        assert_eq!(num(&h, &format!("d[{}]", i + 1)), want);
    }
}

#[test]
fn bulk_over_vectors_with_broadcast_and_strength_fields() {
    let h = host();
    let k = kernel();
    eval(
        &h,
        "s = m:strength{density = linspace(950, 990, 5), t = 20}",
    );
    for i in 0..5 {
        let rho = 950.0 + 10.0 * i as f64;
        let want = k.strength_from_density(rho, 20.0).unwrap();
        assert_eq!(num(&h, &format!("s.abv[{}]", i + 1)), want.abv);
        assert_eq!(num(&h, &format!("s.proof[{}]", i + 1)), want.proof);
    }
    // Temperatures as the array, composition broadcast.
    eval(&h, "d = m:density{abv = 40, t = vec{10, 20, 30}}");
    for (i, t) in [10.0, 20.0, 30.0].iter().enumerate() {
        let want = k.density_of(Composition::abv(40.0), *t).unwrap();
        assert_eq!(num(&h, &format!("d[{}]", i + 1)), want);
    }
    // Two arrays element by element.
    eval(&h, "d = m:density{abv = {10, 40}, t = {15, 25}}");
    assert_eq!(
        num(&h, "d[2]"),
        k.density_of(Composition::abv(40.0), 25.0).unwrap()
    );
    // Two-output properties give two vectors.
    eval(&h, "a, b = m:pmv{w = {0.2, 0.4}}");
    assert_eq!(
        num(&h, "b[2]"),
        k.partial_molar_volumes(0.4, 20.0).unwrap()[1]
    );
}

#[test]
fn density_of_mass_fraction_arrays_matches_the_kernel() {
    let h = host();
    let k = kernel();
    eval(
        &h,
        "d = m:density{w = linspace(0, 1, 101), t = vec(linspace(-20, 40, 101))}",
    );
    eval(&h, "e = m:density{w = linspace(0, 1, 101), t = 25}");
    for i in 0..=100 {
        let w = i as f64 / 100.0;
        let t = -20.0 + 60.0 * i as f64 / 100.0;
        let got = num(&h, &format!("d[{}]", i + 1));
        let want = k
            .density(
                num(&h, &format!("linspace(0, 1, 101)[{}]", i + 1)),
                num(&h, &format!("linspace(-20, 40, 101)[{}]", i + 1)),
            )
            .unwrap();
        assert_eq!(got, want, "w {w} t {t}");
        assert_eq!(
            num(&h, &format!("e[{}]", i + 1)),
            k.density(num(&h, &format!("linspace(0, 1, 101)[{}]", i + 1)), 25.0)
                .unwrap()
        );
    }
    fails_with(
        &h,
        "m:density{w = {0.5, 1.5}}",
        &["at index 2", "mass fraction", "1.5"],
    );
    fails_with(
        &h,
        "m:density{w = {0.5, 0.6}, t = {20, 50}}",
        &["at index 2", "temperature", "50"],
    );
}

#[test]
fn long_density_arrays_agree_with_the_one_point_solve() {
    // Density arrays are solved in one slice call (the reference
    // equation's vectorised solve); it must agree with the kernel's
    // one-point solve to its tolerance.
    let h = host();
    let k = kernel();
    eval(
        &h,
        "rho = linspace(794, 999, 5000) s = m:strength{density = rho, t = 15}",
    );
    eval(&h, "v1, v2 = m:pmv{density = rho, t = 15}");
    for i in (1..=5000).step_by(37) {
        let rho = num(&h, &format!("rho[{i}]"));
        let want = k.strength_from_density(rho, 15.0).unwrap();
        let w = num(&h, &format!("s.w[{i}]"));
        assert!((w - want.w).abs() < 1e-11, "w at {rho}: {w} vs {}", want.w);
        let abv = num(&h, &format!("s.abv[{i}]"));
        assert!(
            (abv - want.abv).abs() < 1e-8,
            "abv at {rho}: {abv} vs {}",
            want.abv
        );
        let pmv = k.partial_molar_volumes(want.w, 15.0).unwrap();
        let v2 = num(&h, &format!("v2[{i}]"));
        assert!((v2 - pmv[1]).abs() < 1e-8 * pmv[1].abs(), "pmv at {rho}");
    }
    // At 20 °C (the % vol reference) the measured density is reused.
    eval(
        &h,
        "rho = linspace(790, 998, 5000) s20 = m:strength{density = rho, t = 20}",
    );
    for i in (1..=5000).step_by(41) {
        let rho = num(&h, &format!("rho[{i}]"));
        let want = k.strength_from_density(rho, 20.0).unwrap();
        let abv = num(&h, &format!("s20.abv[{i}]"));
        assert!(
            (abv - want.abv).abs() < 1e-8,
            "abv at {rho}: {abv} vs {}",
            want.abv
        );
        let proof = num(&h, &format!("s20.proof[{i}]"));
        assert!((proof - want.proof).abs() < 2e-8, "proof at {rho}");
    }
    fails_with(
        &h,
        "m:strength{density = linspace(700, 990, 2000), t = 20}",
        &["at index 1", "not reachable"],
    );
}

#[test]
fn bulk_errors_name_argument_and_index() {
    let h = host();
    fails_with(
        &h,
        "m:density{abv = {10, 20}, t = {15, 20, 25}}",
        &["abv has 2", "t has 3"],
    );
    fails_with(
        &h,
        "m:density{abv = {10, nil, 30}}",
        &["density", "abv[2]", "hole"],
    );
    fails_with(&h, "m:density{abv = {10, 0/0}}", &["abv[2]", "finite"]);
    fails_with(&h, "m:density{abv = {10, '3'}}", &["abv[2]", "string"]);
    fails_with(&h, "m:density{abv = {10, true}}", &["abv[2]", "boolean"]);
    fails_with(&h, "m:density{abv = {10, 20, n = 2}}", &["abv", "'n'"]);
    fails_with(
        &h,
        "t = {} t[1] = 10 t[3] = 30 return m:density{abv = t}",
        &["abv[2]", "hole"],
    );
    fails_with(
        &h,
        "m:density{abv = {10, 120}}",
        &["at index 2", "abv", "120"],
    );
    fails_with(
        &h,
        "m:density{abv = vec{10, 20} / vec{1, 0}}",
        &["abv[2]", "finite"],
    );
}

// ---- error cases --------------------------------------------------------

#[test]
fn composition_errors_are_clear() {
    let h = host();
    fails_with(
        &h,
        "m:density{abv = 40, w = 0.3}",
        &["exactly one", "w", "abv"],
    );
    fails_with(&h, "m:density{}", &["one of the keys", "abv"]);
    fails_with(&h, "m:density{t = 20}", &["one of the keys"]);
    fails_with(&h, "m:density{abv = '40'}", &["abv", "string"]);
    fails_with(&h, "m:density{abv = 0/0}", &["abv", "finite"]);
    fails_with(&h, "m:density(40)", &["density", "table", "number"]);
    fails_with(&h, "m:density{abw = 40}", &["unknown key", "abw"]);
    fails_with(&h, "m:density{40}", &["unknown key", "[1]"]);
    // Every unknown key lists the accepted ones; a key that is not a
    // string is described, not quoted as if it were a name.
    fails_with(
        &h,
        "m:density{40}",
        &["unknown key [1]; give values by name", "(accepted: w, abm"],
    );
    fails_with(
        &h,
        "m:density{[true] = 40}",
        &["unknown key boolean true (accepted: w, abm"],
    );
    fails_with(
        &h,
        "m:density{abw = 40}",
        &["unknown key 'abw' (accepted: w, abm"],
    );
    fails_with(&h, "m:density{density = 950, t = 20}", &["one of the keys"]);
    fails_with(&h, "m:strength{density = 950}", &["t is required"]);
    fails_with(&h, "m:convert{abv = 40, t = 15}", &["t_ref"]);
    fails_with(&h, "m:convert{w = 0.4, t_ref = 15}", &["t_ref", "abv"]);
    fails_with(
        &h,
        "m:strength{abv = 40, u_density = 0.1}",
        &["u_density", "density"],
    );
    fails_with(&h, "m:hydrometer{abv = 40}", &["t is required"]);
    fails_with(
        &h,
        "m:hydrometer{abv = 40, proof = 80, t = 20}",
        &["exactly one"],
    );
    fails_with(&h, "m:mix{v1 = 1, m2 = 2}", &["either"]);
    fails_with(
        &h,
        "m:density{abv = 120}",
        &["test:1:", "abv", "120", "0 to 100"],
    );
    fails_with(&h, "m:density{w = 0.5, t = 80}", &["temperature", "80"]);
    fails_with(&h, "m:strength{density = 500, t = 20}", &["not reachable"]);
    fails_with(
        &h,
        "m.density{abv = 40}",
        &["density", "colon", "m:density"],
    );
}

#[test]
fn errors_cite_file_and_line() {
    let h = host();
    let e = h
        .eval(
            "local a = 1\nlocal b = m:density{abv = 400}\n",
            "@lab/check.lua",
        )
        .unwrap_err();
    assert!(
        e.message.starts_with("lab/check.lua:2: density:"),
        "{}",
        e.message
    );
    let e = h
        .eval("local a = 1\n\nerror('boom')", "=stdin")
        .unwrap_err();
    assert_eq!(e.message, "stdin:3: boom");
    // Inside pcall the message is the same one line.
    let msg = eval(
        &h,
        "local ok, e = pcall(m.density, m, {abv = 400}) return e",
    );
    let msg = msg.iter().next().unwrap().to_string().unwrap();
    assert!(msg.starts_with("test:1: density:"), "{msg}");
    assert!(!msg.contains('\n'));
}

#[test]
fn traceback_only_with_trace() {
    let h = host();
    let e = h.eval("m:density{abv = 400}", "=x").unwrap_err();
    assert!(e.traceback.is_none());
    let h = host_with(HostOptions {
        trace: true,
        ..HostOptions::default()
    });
    let e = h
        .eval(
            "local function f() return m:density{abv = 400} end\nf()",
            "@t.lua",
        )
        .unwrap_err();
    let tb = e.traceback.expect("traceback with trace");
    assert!(tb.contains("t.lua:1"), "{tb}");
    assert!(tb.contains("t.lua:2"), "{tb}");
}

// ---- vectors ------------------------------------------------------------

#[test]
fn vector_basics() {
    let h = host();
    eval(&h, "v = vec{1, 2, 3}");
    assert_eq!(num(&h, "#v"), 3.0);
    assert_eq!(num(&h, "v[2]"), 2.0);
    assert_eq!(num(&h, "(v * 2 + 1)[3]"), 7.0);
    assert_eq!(num(&h, "(10 - v)[1]"), 9.0);
    assert_eq!(num(&h, "(v / vec{2, 4, 6})[3]"), 0.5);
    assert_eq!(num(&h, "(-v)[1]"), -1.0);
    assert_eq!(num(&h, "v:sum()"), 6.0);
    assert_eq!(num(&h, "v:min()"), 1.0);
    assert_eq!(num(&h, "v:max()"), 3.0);
    assert_eq!(num(&h, "v:mean()"), 2.0);
    assert_eq!(num(&h, "#v:totable()"), 3.0);
    assert_eq!(
        num(
            &h,
            "local s = 0 for i, x in ipairs(v) do s = s + i * x end return s"
        ),
        14.0
    );
    assert_eq!(
        num(
            &h,
            "local n = 0 for k, x in pairs(v) do n = n + x end return n"
        ),
        6.0
    );
    assert_eq!(num(&h, "v[2] = 5 return v[2]"), 5.0);
    assert_eq!(num(&h, "#range(0, 1, 0.1)"), 11.0);
    assert_eq!(num(&h, "range(1, 10)[10]"), 10.0);
    assert_eq!(num(&h, "linspace(0, 100, 11)[11]"), 100.0);
    assert_eq!(num(&h, "#vec(v)"), 3.0);
    let s = eval(&h, "tostring(range(1, 100))");
    assert_eq!(
        s.iter().next().unwrap().to_string().unwrap(),
        "vec{1, 2, 3, 4, 5, 6, …, 99, 100} (100 values)"
    );
    assert_eq!(
        eval(&h, "vec{1, 2} == vec{1, 2}").iter().next(),
        Some(&Value::Boolean(true))
    );
}

#[test]
fn vector_errors() {
    let h = host();
    eval(&h, "v = vec{1, 2, 3}");
    fails_with(&h, "v[0]", &["test:1:", "index 0", "out of range 1..3"]);
    fails_with(&h, "v[4]", &["index 4"]);
    fails_with(&h, "v[1.5]", &["integer"]);
    fails_with(&h, "v.foo", &["no field 'foo'"]);
    fails_with(&h, "v[1] = 'x'", &["number"]);
    fails_with(&h, "v + vec{1, 2}", &["lengths differ"]);
    fails_with(&h, "v + {1, 2, 3}", &["vec{"]);
    fails_with(&h, "vec{1, nil, 3}", &["values[2]", "hole"]);
    fails_with(&h, "vec{1, 'a'}", &["values[2]", "string"]);
    fails_with(&h, "range(1, 10, 0)", &["step"]);
    fails_with(&h, "linspace(0, 1, 2.5)", &["whole number"]);
    fails_with(&h, "range('1', 2)", &["from", "string"]);
}

#[test]
fn rust_allocations_are_bounded() {
    let h = host_with(HostOptions {
        memory_limit: 64 * 1024 * 1024,
        timeout: Some(Duration::from_secs(20)),
        ..HostOptions::default()
    });
    fails_with(&h, "range(1, 1e9)", &["range", "more than"]);
    fails_with(&h, "linspace(0, 1, 2e8)", &["linspace", "more than"]);
    // 80 MB of vector under a 64 MiB limit.
    fails_with(&h, "linspace(0, 1, 1e7)", &["not enough memory"]);
    // Vectors nobody holds are collected to make room.
    assert_eq!(
        num(
            &h,
            "local v for i = 1, 30 do v = linspace(0, 1, 2e6) end return #v"
        ),
        2e6
    );
    // Many vectors held at once hit the limit.
    fails_with(
        &h,
        "keep = {} for i = 1, 100 do keep[i] = linspace(0, 1, 1e6) end",
        &["not enough memory"],
    );
    eval(&h, "keep = nil");
    assert_eq!(num(&h, "#linspace(0, 1, 1e6)"), 1e6);
}

// ---- help ---------------------------------------------------------------

#[test]
fn help_covers_every_function() {
    let h = host();
    let names = h.help_entries();
    let has = |n: &str| names.iter().any(|e| e.name == n);
    for n in [
        "vec",
        "range",
        "linspace",
        "help",
        "show",
        "print",
        "load",
        "mixture",
        "mixture.ethanol_water",
        "files.read",
        "files.write",
        "files.exists",
    ] {
        assert!(has(n), "no help for {n}");
    }
    for m in meniscus::lua::mixture::METHODS {
        assert!(has(&format!("mixture:{m}")), "no help for mixture:{m}");
    }
    for m in meniscus::lua::vector::METHODS {
        assert!(has(&format!("vector:{m}")), "no help for vector:{m}");
    }
    // Every global function of the API has an entry or is standard Lua.
    let standard = [
        "assert",
        "error",
        "getmetatable",
        "ipairs",
        "next",
        "pairs",
        "pcall",
        "rawequal",
        "rawget",
        "rawlen",
        "rawset",
        "select",
        "setmetatable",
        "tonumber",
        "tostring",
        "type",
        "xpcall",
        "warn",
    ];
    for pair in h.lua().globals().pairs::<String, Value>() {
        let (k, v) = pair.unwrap();
        if v.is_function() && !standard.contains(&k.as_str()) {
            assert!(has(&k), "global function {k} has no help");
            // help(value) finds it too.
            eval(&h, &format!("help({k})"));
            let out = h.take_output();
            assert!(!out.contains("no help"), "help({k}): {out}");
        }
    }
    for f in [
        "mixture.ethanol_water",
        "files.read",
        "files.write",
        "files.exists",
        "m.density",
        "m.pmv",
        "m.mix",
    ] {
        eval(&h, &format!("help({f})"));
        let out = h.take_output();
        assert!(!out.contains("no help"), "help({f}): {out}");
    }
}

#[test]
fn help_shows_signature_units_source_and_cautions() {
    let h = host();
    eval(&h, "help 'density'");
    let out = h.take_output();
    assert!(out.contains("m:density{"), "{out}");
    assert!(out.contains("kg/m³"), "{out}");
    assert!(out.contains("−20 to 40 °C"), "{out}");
    eval(&h, "help(m.density)");
    assert!(h.take_output().contains("kg/m³"));
    eval(&h, "help(mixture.ethanol_water)");
    let out = h.take_output();
    assert!(out.contains("OIML R 22"), "{out}");
    assert!(out.contains("not a certified measurement"), "{out}");
    assert!(out.contains("local"), "{out}");
    eval(&h, "help(m)");
    let out = h.take_output();
    assert!(
        out.contains("hydrometer") && out.contains("officially"),
        "{out}"
    );
    eval(&h, "help 'no_such_thing'");
    assert!(h.take_output().contains("no help"));
}

#[test]
fn other_namespaces_can_add_help() {
    let h = host();
    meniscus::lua::add_help(
        h.lua(),
        "blend.plan",
        "blend.plan{…} → table",
        "Plans a blend.",
    )
    .unwrap();
    assert!(h.help_text("blend.plan").contains("Plans a blend."));
    assert!(h.help_text("plan").contains("blend.plan{…}"));
    let (_, c) = h.completions("help 'blend.p", 13);
    assert_eq!(c, vec!["blend.plan".to_string()]);
}

// ---- display ------------------------------------------------------------

#[test]
fn strength_tables_print_aligned() {
    let h = host();
    let v = eval(&h, "m:convert{abv = 40}");
    let text = h.format_values(&v);
    let s = kernel().convert(Composition::abv(40.0)).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines.len(), 5, "{text}");
    assert!(lines[0].starts_with("w     = "), "{text}");
    assert!(lines[3].starts_with("abv   = "), "{text}");
    assert!(lines[4].starts_with("proof = "), "{text}");
    // Six significant digits of the kernel value.
    assert_eq!(
        lines[3],
        format!("abv   = {}", meniscus::lua::format::fmt_number(s.abv))
    );
    assert_eq!(meniscus::lua::format::fmt_number(948.051234), "948.051");
}

#[test]
fn bulk_tables_print_as_columns() {
    let h = host();
    let v = eval(&h, "m:convert{abv = linspace(0, 100, 101)}");
    let text = h.format_values(&v);
    assert!(text.lines().next().unwrap().contains("abv"), "{text}");
    assert!(text.contains('…'), "{text}");
    assert!(text.contains("(101 rows)"), "{text}");
    assert!(text.lines().count() < 40);
}

#[test]
fn cyclic_and_deep_tables_print_safely() {
    let h = host();
    let v = eval(&h, "t = {a = 1} t.self = t return t");
    assert!(h.format_values(&v).contains("<cycle>"));
    let v = eval(
        &h,
        "local t = {} local cur = t for i = 1, 10000 do cur.next = {} cur = cur.next end return t",
    );
    let text = h.format_values(&v);
    assert!(text.contains("{…}"), "{text}");
    eval(&h, "show(t)");
    assert!(h.take_output().contains("<cycle>"));
    eval(&h, "print(t)");
    assert!(h.take_output().contains("<cycle>"));
    let v = eval(
        &h,
        "local big = {} for i = 1, 100000 do big['k' .. i] = i end return big",
    );
    let text = h.format_values(&v);
    assert!(
        text.contains("more keys"),
        "{}",
        &text[..200.min(text.len())]
    );
    assert!(text.lines().count() < 100);
}

#[test]
fn print_stays_lua_compatible_for_scalars() {
    let h = host();
    eval(&h, "print(1, 'a', 2.5, nil, true, 1.0)");
    assert_eq!(h.take_output(), "1\ta\t2.5\tnil\ttrue\t1.0\n");
    eval(&h, "print({1, 2}, vec{3})");
    assert_eq!(h.take_output(), "{1, 2}\tvec{3}\n");
    eval(
        &h,
        "print(setmetatable({}, {__tostring = function() return 'custom' end}))",
    );
    assert_eq!(h.take_output(), "custom\n");
    // A __tostring that prints itself ends in an error, not a crash.
    let e = err(
        &h,
        "local t t = setmetatable({}, {__tostring = function(x) print(x) return '' end}) print(t)",
    );
    assert!(
        e.message.contains("nested") || e.message.contains("stack"),
        "{}",
        e.message
    );
}

// ---- completion and completeness ---------------------------------------

#[test]
fn completion_over_live_names() {
    let h = host();
    let (s, c) = h.completions("x = mix", 7);
    assert_eq!(s, 4);
    assert!(c.contains(&"mixture".to_string()));
    let (_, c) = h.completions("mixture.eth", 11);
    assert_eq!(c, vec!["ethanol_water".to_string()]);
    let (s, c) = h.completions("m:de", 4);
    assert_eq!(s, 2);
    assert_eq!(c, vec!["density".to_string(), "describe".to_string()]);
    let (_, c) = h.completions("m:density{ab", 12);
    assert_eq!(c, vec!["abm".to_string(), "abv".to_string()]);
    let (_, c) = h.completions("m:strength{density = 950, u_", 28);
    assert_eq!(c, vec!["u_density".to_string(), "u_t".to_string()]);
    eval(&h, "v = vec{1}");
    let (_, c) = h.completions("v:to", 4);
    assert_eq!(c, vec!["totable".to_string()]);
    eval(&h, "my_tank_volume = 3");
    let (_, c) = h.completions("my_ta", 5);
    assert_eq!(c, vec!["my_tank_volume".to_string()]);
    let (_, c) = h.completions("help 'mixture:hy", 16);
    assert_eq!(c, vec!["mixture:hydrometer".to_string()]);
    let (_, c) = h.completions("s = ('x'):up", 12);
    assert_eq!(c, vec!["upper".to_string()]);
}

#[test]
fn completeness_of_repl_input() {
    let h = host();
    assert_eq!(h.completeness("for i = 1, 3 do"), Completeness::Incomplete);
    assert_eq!(h.completeness("x = "), Completeness::Incomplete);
    assert_eq!(h.completeness("s = [[abc"), Completeness::Incomplete);
    assert_eq!(h.completeness("1 + 1"), Completeness::Complete);
    assert_eq!(
        h.completeness("for i = 1, 3 do end"),
        Completeness::Complete
    );
    assert_eq!(h.completeness("x = = 2"), Completeness::Complete);
}

#[test]
fn reset_drops_user_state_keeps_interrupt() {
    let mut h = host();
    let flag = h.interrupt_handle();
    eval(&h, "my_value = 5");
    h.reset().unwrap();
    assert!(matches!(
        eval(&h, "my_value").iter().next(),
        Some(Value::Nil)
    ));
    assert!(std::sync::Arc::ptr_eq(&flag, &h.interrupt_handle()));
    assert!(num(&h, "mixture.ethanol_water():density{w = 0}") > 990.0);
}

#[test]
fn run_file_sets_arg_and_cites_the_file() {
    let dir = scratch_dir("run_file");
    let script = dir.join("job.lua");
    std::fs::write(
        &script,
        "#!/usr/bin/env meniscus\nresult = arg[1] .. '/' .. #arg\nlocal m = mixture.ethanol_water()\nm:density{abv = 101}\n",
    )
    .unwrap();
    let h = host();
    let e = h.run_file(&script, &["a".into(), "b".into()]).unwrap_err();
    assert!(
        e.message.starts_with(&format!("{}:4:", script.display())),
        "{}",
        e.message
    );
    assert_eq!(
        eval(&h, "result")
            .iter()
            .next()
            .unwrap()
            .to_string()
            .unwrap(),
        "a/2"
    );
    let e = h.run_file(&dir.join("missing.lua"), &[]).unwrap_err();
    assert!(e.message.contains("cannot read script"));
}

// ---- reliability: the sandbox ------------------------------------------

#[test]
fn unsafe_libraries_are_absent() {
    let h = host();
    for name in [
        "io",
        "os",
        "require",
        "package",
        "debug",
        "dofile",
        "loadfile",
        "collectgarbage",
        "string.dump",
    ] {
        let v = eval(&h, name);
        assert!(
            matches!(v.iter().next(), Some(Value::Nil)),
            "{name} should be absent"
        );
    }
    fails_with(&h, "os.exit(1)", &["os"]);
    fails_with(&h, "io.open('/etc/passwd')", &["io"]);
    fails_with(&h, "require('os')", &["require"]);
    fails_with(&h, "package.loadlib('libc.so.6', 'system')", &["package"]);
    fails_with(&h, "debug.getregistry()", &["debug"]);
}

#[test]
fn load_accepts_text_only() {
    let h = host();
    assert_eq!(num(&h, "load('return 1 + 2')()"), 3.0);
    assert_eq!(num(&h, "load('return x', 'c', 't', {x = 7})()"), 7.0);
    let v = eval(
        &h,
        "load(string.char(27) .. 'LuaT\\0\\25\\147\\r\\n\\26\\n')",
    );
    let mut it = v.iter();
    assert!(matches!(it.next(), Some(Value::Nil)));
    assert!(it.next().unwrap().to_string().unwrap().contains("binary"));
    let v = eval(&h, "load('return 1', 'c', 'b')");
    assert!(matches!(v.iter().next(), Some(Value::Nil)));
    let v = eval(&h, "load(function() return nil end)");
    assert!(matches!(v.iter().next(), Some(Value::Nil)));
    // A binary chunk given directly to the host is refused too.
    let e = h.eval("\x1bLuaT\0", "=bin").unwrap_err();
    assert!(
        e.message.contains("binary") || e.message.contains("mode"),
        "{}",
        e.message
    );
}

#[test]
fn string_metatable_is_protected() {
    let h = host();
    assert_eq!(
        eval(&h, "getmetatable('')").iter().next(),
        Some(&Value::Boolean(false))
    );
    fails_with(&h, "getmetatable('').__index = {}", &["index"]);
    assert_eq!(num(&h, "('abc'):len()"), 3.0);
}

// ---- reliability: time, interrupt, pcall, coroutines --------------------

fn quick_timeout() -> Host {
    host_with(HostOptions {
        timeout: Some(Duration::from_millis(200)),
        ..HostOptions::default()
    })
}

fn stops_in_time(h: &Host, src: &str) {
    let t0 = Instant::now();
    let e = err(h, src);
    assert!(e.message.contains("time limit"), "{src}: {}", e.message);
    assert!(
        t0.elapsed() < Duration::from_secs(10),
        "{src}: took {:?}",
        t0.elapsed()
    );
    // The state is usable afterwards, with a fresh budget.
    assert_eq!(num(h, "1 + 1"), 2.0);
}

#[test]
fn infinite_loops_are_stopped() {
    let h = quick_timeout();
    stops_in_time(&h, "while true do end");
    stops_in_time(&h, "pcall(function() while true do end end) return 1");
    stops_in_time(
        &h,
        "while true do pcall(function() while true do end end) end",
    );
    stops_in_time(
        &h,
        "while true do xpcall(function() while true do end end, function(e) return e end) end",
    );
    stops_in_time(&h, "local function f() return f() end return f()");
}

#[test]
fn loops_in_coroutines_are_stopped() {
    let h = quick_timeout();
    stops_in_time(&h, "coroutine.wrap(function() while true do end end)()");
    stops_in_time(
        &h,
        "local co = coroutine.create(function() while true do pcall(function() while true do end end) end end) \
         while true do coroutine.resume(co) end",
    );
    stops_in_time(
        &h,
        "while true do coroutine.resume(coroutine.create(function() while true do end end)) end",
    );
}

#[test]
fn finalizers_are_refused_and_close_handlers_are_stopped() {
    // Lua runs __gc with hooks off: a looping finalizer could never be
    // stopped, so scripts may not set one.
    let h = quick_timeout();
    fails_with(
        &h,
        "setmetatable({}, {__gc = function() while true do end end})",
        &["__gc"],
    );
    fails_with(&h, "setmetatable({}, {__gc = true})", &["__gc"]);
    // Adding __gc afterwards does not mark the object: nothing runs.
    assert_eq!(
        num(
            &h,
            "local mt = {} local x = setmetatable({}, mt) \
             mt.__gc = function() while true do end end x = nil \
             for i = 1, 1e5 do local t = {} end return 3"
        ),
        3.0
    );
    stops_in_time(
        &h,
        "do local x <close> = setmetatable({}, {__close = function() while true do end end}) end",
    );
    fails_with(
        &h,
        "setmetatable(1, {})",
        &["setmetatable", "table", "number"],
    );
    assert_eq!(num(&h, "setmetatable({}, {__index = {a = 4}}).a"), 4.0);
}

#[test]
fn lua_code_outside_an_evaluation_is_stopped() {
    // Lua code run by the host's own work (or by an embedder calling the
    // state directly) with no evaluation going on is stopped at the first
    // hook check instead of running unbounded.
    let h = quick_timeout();
    let f: mlua::Function = h
        .lua()
        .load("return function() while true do end end")
        .eval()
        .unwrap();
    let e = f.call::<()>(()).unwrap_err();
    assert!(e.to_string().contains("outside an evaluation"), "{e}");
    // Host::run applies the evaluation's limits to Rust code calling Lua.
    let e = h.run(|_| f.call::<()>(())).unwrap_err();
    assert!(e.message.contains("time limit"), "{}", e.message);
    assert_eq!(
        h.run(|lua| lua.load("return 6 * 7").eval::<i64>()).unwrap(),
        42
    );
}

#[test]
fn interrupt_flag_stops_the_evaluation() {
    let h = host();
    let flag = h.interrupt_handle();
    let setter = std::thread::spawn(move || {
        std::thread::sleep(Duration::from_millis(100));
        flag.store(true, Ordering::SeqCst);
    });
    let t0 = Instant::now();
    let e = err(&h, "local co = coroutine.wrap(function() while true do pcall(function() while true do end end) end end) co()");
    setter.join().unwrap();
    assert!(e.message.contains("interrupted"), "{}", e.message);
    assert!(t0.elapsed() < Duration::from_secs(5));
    // Cleared for the next evaluation.
    assert_eq!(num(&h, "1 + 1"), 2.0);
}

#[test]
fn rust_panics_are_reported_as_bugs() {
    let h = host();
    let boom = h
        .lua()
        .create_function(|_, ()| -> mlua::Result<()> { panic!("deliberate test panic") })
        .unwrap();
    h.lua().globals().set("boom", boom).unwrap();
    for src in [
        "boom()",
        "pcall(boom) return 1",
        "coroutine.resume(coroutine.create(boom)) return 1",
        "coroutine.wrap(function() pcall(boom) end)() return 1",
    ] {
        let e = err(&h, src);
        assert!(e.message.contains("internal error"), "{src}: {}", e.message);
        assert!(
            e.message.contains("deliberate test panic"),
            "{src}: {}",
            e.message
        );
    }
    assert_eq!(num(&h, "1 + 1"), 2.0);
}

// ---- reliability: memory and recursion ----------------------------------

fn small_memory() -> Host {
    host_with(HostOptions {
        memory_limit: 32 * 1024 * 1024,
        timeout: Some(Duration::from_secs(20)),
        ..HostOptions::default()
    })
}

#[test]
fn memory_bombs_fail_and_the_state_survives() {
    let h = small_memory();
    for src in [
        "s = string.rep('x', 1e8)",
        "t = {} for i = 1, 1e8 do t[i] = i end",
        "s = 'x' while true do s = s .. s end",
        "t = {} for i = 1, 1e7 do t[i] = {i} end",
        "cs = {} for i = 1, 1e7 do cs[i] = coroutine.create(function() end) end",
        "local ok, e = pcall(string.rep, 'x', 1e8) s = string.rep('y', 1e8)",
    ] {
        let e = err(&h, src);
        assert!(
            e.message.contains("not enough memory"),
            "{src}: {}",
            e.message
        );
        eval(&h, "s, t, cs = nil, nil, nil");
        assert_eq!(num(&h, "#string.rep('ab', 1000)"), 2000.0);
        assert!(num(&h, "m:density{w = 0.5}") > 900.0);
    }
}

#[test]
fn deep_recursion_is_an_error() {
    let h = host();
    fails_with(
        &h,
        "local function f(n) return 1 + f(n + 1) end return f(1)",
        &["stack overflow"],
    );
    let e = err(
        &h,
        "local t = setmetatable({}, {__index = function(t, k) return t[k] end}) return t.x",
    );
    assert!(e.message.contains("stack overflow"), "{}", e.message);
    assert_eq!(num(&h, "1 + 1"), 2.0);
}

// ---- reliability: files -------------------------------------------------

fn scratch_dir(name: &str) -> PathBuf {
    common::scratch_dir("lua_host", name)
}

#[test]
fn reading_outside_allowed_paths_is_refused() {
    let h = host();
    fails_with(&h, "files.read('/etc/passwd')", &["outside", "allow"]);
    fails_with(
        &h,
        "files.read('../../../../../../etc/passwd')",
        &["outside"],
    );
    let d = scratch_dir("read");
    std::fs::write(d.join("ok.txt"), "hello").unwrap();
    let rel = d.join("ok.txt");
    let v = eval(&h, &format!("files.read({})", lua_str(&rel)));
    assert_eq!(v.iter().next().unwrap().to_string().unwrap(), "hello");
    // A symlink inside the working directory that points outside.
    #[cfg(unix)]
    {
        let link = d.join("passwd-link");
        std::os::unix::fs::symlink("/etc/passwd", &link).unwrap();
        fails_with(&h, &format!("files.read({})", lua_str(&link)), &["outside"]);
    }
}

#[test]
fn writing_outside_allowed_paths_is_refused() {
    let h = host();
    let outside = std::env::temp_dir().join(format!("meniscus-outside-{}", std::process::id()));
    std::fs::create_dir_all(&outside).unwrap();
    let target = outside.join("x.txt");
    fails_with(
        &h,
        &format!("files.write({}, 'x')", lua_str(&target)),
        &["outside"],
    );
    assert!(!target.exists());
    fails_with(&h, "files.write('/etc/meniscus-test', 'x')", &["outside"]);
    // Allowed when the user allows that directory.
    let h2 = host_with(HostOptions {
        allow_paths: vec![outside.clone()],
        ..HostOptions::default()
    });
    eval(
        &h2,
        &format!("files.write({}, 'allowed')", lua_str(&target)),
    );
    assert_eq!(std::fs::read_to_string(&target).unwrap(), "allowed");
    std::fs::remove_dir_all(&outside).unwrap();
}

#[test]
fn writes_are_atomic_and_leave_no_temporary_files() {
    let h = host();
    let d = scratch_dir("write");
    let target = d.join("report.txt");
    std::fs::write(&target, "old").unwrap();
    eval(
        &h,
        &format!("files.write({}, 'new contents')", lua_str(&target)),
    );
    assert_eq!(std::fs::read_to_string(&target).unwrap(), "new contents");
    let names: Vec<String> = std::fs::read_dir(&d)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(names, vec!["report.txt".to_string()]);
    assert_eq!(
        eval(&h, &format!("files.exists({})", lua_str(&target)))
            .iter()
            .next(),
        Some(&Value::Boolean(true))
    );
    // Into a directory that does not exist: an error, nothing written.
    fails_with(
        &h,
        &format!("files.write({}, 'x')", lua_str(&d.join("no/such/dir.txt"))),
        &["cannot write"],
    );
    fails_with(&h, "files.write(42, 'x')", &["path must be a string"]);
}

#[test]
fn resolve_path_is_usable_from_rust() {
    let h = host();
    let d = scratch_dir("resolve");
    let p = meniscus::lua::files::resolve_path(h.lua(), d.join("new.csv"), true).unwrap();
    assert!(p.starts_with(d.canonicalize().unwrap()));
    assert!(meniscus::lua::files::resolve_path(h.lua(), "/etc/passwd", false).is_err());
    assert!(meniscus::lua::files::resolve_path(h.lua(), "/etc/new.csv", true).is_err());
}
