//! The process calculations from Lua (`m:pure_alcohol`, `m:reduce`,
//! `m:blend`, `m:plan_blend`, `m:bottles`), the `units` namespace and the
//! file functions the daily round uses (`files.read_csv`, `files.write_csv`,
//! `files.mkdir`, `plot.bars`): each result checked against the kernel
//! called directly with the same inputs, the error cases checked for a
//! clear one-line message, and mass and alcohol conserved across Lua blends
//! and reductions.
#![cfg(feature = "lua")]

use std::time::Duration;

use meniscus::kernel::process::{
    self, units, Amount, Lot, PlanLot, PlanTarget, PlanWater, Weighing,
};
use meniscus::kernel::{Composition, EthanolWater, Mixture};
use meniscus::lua::{Host, HostOptions};
use mlua::{Table, Value};
use proptest::prelude::*;
use proptest::test_runner::{Config, TestRunner};

mod common;
use common::field as get;
use common::{close, eval, fails_with, lua_str as lua_path, table};

fn host_with(options: HostOptions) -> Host {
    common::ethanol_water_host(HostOptions {
        timeout: Some(Duration::from_secs(20)),
        ..options
    })
}

fn host() -> Host {
    host_with(HostOptions::default())
}

fn k() -> EthanolWater {
    EthanolWater::new()
}

// ---- each method against the kernel -------------------------------------

#[test]
fn pure_alcohol_by_volume_matches_the_kernel() {
    let h = host();
    let want =
        process::pure_alcohol(&k(), &Lot::volume(1000.0, 25.0, Composition::abv(40.0))).unwrap();
    let t = table(&h, "m:pure_alcohol{volume = 1000, abv = 40, t = 25}");
    for (key, v) in [
        ("lpa", want.lpa),
        ("proof_gallons", want.proof_gallons),
        ("volume", want.volume_20),
        ("mass", want.mass),
        ("abv", want.abv),
        ("proof", want.proof),
        ("w", want.w),
        ("wine_gallons", want.wine_gallons),
    ] {
        assert_eq!(get(&t, key), v, "{key}");
    }
    // t defaults to 20 °C.
    let want20 =
        process::pure_alcohol(&k(), &Lot::volume(750.0, 20.0, Composition::Proof(90.0))).unwrap();
    let t = table(&h, "m:pure_alcohol{volume = 750, proof = 90}");
    assert_eq!(get(&t, "lpa"), want20.lpa);
}

#[test]
fn pure_alcohol_weighed_in_air_matches_the_kernel() {
    let h = host();
    let lot = Lot::weighed_in_air(453.6, 20.0, Composition::Proof(200.0), Weighing::default());
    let want = process::pure_alcohol(&k(), &lot).unwrap();
    let t = table(&h, "m:pure_alcohol{mass = 453.6, proof = 200, air = true}");
    assert_eq!(get(&t, "mass"), want.mass);
    assert_eq!(get(&t, "lpa"), want.lpa);
    assert_eq!(get(&t, "proof_gallons"), want.proof_gallons);
    // The buoyancy correction makes the true mass larger than the reading.
    assert!(want.mass > 453.6);

    let lot = Lot::weighed_in_air(
        182.4,
        23.9,
        Composition::abv(72.5),
        Weighing {
            air_density: 1.15,
            weights_density: 7950.0,
        },
    );
    let want = process::pure_alcohol(&k(), &lot).unwrap();
    let t = table(
        &h,
        "m:pure_alcohol{mass = 182.4, abv = 72.5, t = 23.9, air = true, air_density = 1.15, weights_density = 7950}",
    );
    assert_eq!(get(&t, "mass"), want.mass);
    assert_eq!(get(&t, "volume"), want.volume_20);

    // Without air = true the mass is taken as the true mass.
    let want = process::pure_alcohol(&k(), &Lot::mass(453.6, Composition::Proof(200.0))).unwrap();
    let t = table(&h, "m:pure_alcohol{mass = 453.6, proof = 200}");
    assert_eq!(get(&t, "mass"), 453.6);
    assert_eq!(get(&t, "lpa"), want.lpa);
}

#[test]
fn any_composition_key_describes_a_lot() {
    let h = host();
    let cases: [(&str, Composition); 5] = [
        ("w = 0.4", Composition::W(0.4)),
        ("abm = 35", Composition::Abm(35.0)),
        ("x = 0.15", Composition::X(0.15)),
        (
            "abv = 40, t_ref = 15",
            Composition::Abv {
                abv: 40.0,
                t_ref: 15.0,
            },
        ),
        (
            "density = 950.5, t = 14",
            Composition::Density {
                rho: 950.5,
                t: 14.0,
            },
        ),
    ];
    for (src, c) in cases {
        // With density, t is also the gauging temperature.
        let t_gauge = if src.contains("density") { 14.0 } else { 20.0 };
        let want = process::pure_alcohol(&k(), &Lot::volume(500.0, t_gauge, c)).unwrap();
        let t = table(&h, &format!("m:pure_alcohol{{volume = 500, {src}}}"));
        assert_eq!(get(&t, "lpa"), want.lpa, "{src}");
        assert_eq!(get(&t, "w"), want.w, "{src}");
    }
}

#[test]
fn reduce_matches_the_kernel() {
    let h = host();
    let lot = Lot::volume(1000.0, 20.0, Composition::abv(63.5));
    let want = process::reduce_with_water_at(&k(), &lot, Composition::abv(40.0), 9.0).unwrap();
    let t = table(
        &h,
        "m:reduce{volume = 1000, abv = 63.5, t = 20, target = 40, water_t = 9}",
    );
    for (key, v) in [
        ("water", want.water_l),
        ("water_kg", want.water_kg),
        ("water_at_t", want.water_l_at_t),
        ("volume", want.final_volume),
        ("mass", want.final_mass),
        ("w", want.final_w),
        ("lot_volume", want.lot_volume_20),
        ("contraction", want.contraction),
        ("naive_water", want.naive_water_l),
        ("naive_error", want.naive_error_l),
    ] {
        assert_eq!(get(&t, key), v, "{key}");
    }
    assert_eq!(
        get(&t, "abv"),
        k().abv_at(want.final_w, 20.0).unwrap(),
        "abv"
    );
    // Water at 20 °C by default; a target in another basis.
    let lot = Lot::mass(800.0, Composition::Proof(150.0));
    let want = process::reduce(&k(), &lot, Composition::Proof(80.0)).unwrap();
    let t = table(
        &h,
        "m:reduce{mass = 800, proof = 150, target = {proof = 80}}",
    );
    assert_eq!(get(&t, "water"), want.water_l);
    assert_eq!(get(&t, "water_at_t"), want.water_l);
    assert_eq!(get(&t, "volume"), want.final_volume);
}

#[test]
fn blend_matches_the_kernel() {
    let h = host();
    let lots = [
        Lot::volume(500.0, 20.0, Composition::abv(60.0)),
        Lot::mass(250.0, Composition::abv(40.0)),
        Lot::volume(120.0, 11.0, Composition::W(0.0)),
    ];
    let want = process::blend(&k(), &lots).unwrap();
    let t = table(
        &h,
        "m:blend{{volume = 500, abv = 60, t = 20}, {mass = 250, abv = 40}, {volume = 120, abv = 0, t = 11}}",
    );
    for (key, v) in [
        ("volume", want.volume),
        ("mass", want.mass),
        ("abv", want.abv),
        ("w", want.w),
        ("proof", want.proof),
        ("lpa", want.lpa),
        ("lots_volume", want.lots_volume_20),
        ("contraction", want.contraction),
    ] {
        assert_eq!(get(&t, key), v, "{key}");
    }
}

#[test]
fn plan_blend_matches_the_kernel() {
    let h = host();
    let lots = [
        PlanLot::new(Composition::abv(60.0))
            .with_cost(9.0)
            .with_limit(Amount::Volume {
                litres: 500.0,
                t: 20.0,
            }),
        PlanLot::new(Composition::abv(45.0))
            .with_cost(5.0)
            .with_temperature(14.0),
        PlanLot::new(Composition::abv(70.0))
            .with_cost(7.5)
            .with_limit(Amount::Mass { kg: 200.0 }),
    ];
    let water = PlanWater {
        t: Some(12.0),
        limit: None,
        cost_per_l: 0.01,
    };
    let target = PlanTarget {
        strength: Composition::abv(40.0),
        volume_20: 1000.0,
    };
    let want = process::plan_blend(&k(), &lots, Some(&water), &target).unwrap();
    let t = table(
        &h,
        "m:plan_blend{lots = {{abv = 60, cost = 9, limit = 500}, {abv = 45, cost = 5, t = 14}, \
         {abv = 70, cost = 7.5, limit_mass = 200}}, target = {abv = 40, volume = 1000}, \
         water = {cost = 0.01, t = 12}}",
    );
    assert_eq!(get(&t, "cost"), want.total_cost);
    let got_lots: Table = t.get("lots").unwrap();
    assert_eq!(got_lots.raw_len(), 3);
    for (i, item) in want.lots.iter().enumerate() {
        let g: Table = got_lots.get(i + 1).unwrap();
        assert_eq!(get(&g, "volume"), item.volume_20, "lot {}", i + 1);
        assert_eq!(get(&g, "mass"), item.mass, "lot {}", i + 1);
        assert_eq!(get(&g, "cost"), item.cost, "lot {}", i + 1);
        match item.volume_at_t {
            Some(v) => assert_eq!(get(&g, "volume_at_t"), v),
            None => assert!(g.get::<Value>("volume_at_t").unwrap().is_nil()),
        }
    }
    let w: Table = t.get("water").unwrap();
    let ww = want.water.unwrap();
    assert_eq!(get(&w, "volume"), ww.volume_20);
    assert_eq!(get(&w, "volume_at_t"), ww.volume_at_t.unwrap());
    let b: Table = t.get("blend").unwrap();
    assert_eq!(get(&b, "volume"), want.blend.volume);
    assert_eq!(get(&b, "abv"), want.blend.abv);

    // Water omitted: free and unlimited; water = false: none.
    let want = process::plan_blend(
        &k(),
        &[PlanLot::new(Composition::abv(60.0))],
        Some(&PlanWater::default()),
        &target,
    )
    .unwrap();
    let t = table(
        &h,
        "m:plan_blend{lots = {{abv = 60}}, target = {abv = 40, volume = 1000}}",
    );
    let w: Table = t.get("water").unwrap();
    assert_eq!(get(&w, "mass"), want.water.unwrap().mass);
    let t = table(
        &h,
        "m:plan_blend{lots = {{abv = 60}, {abv = 30}}, target = {abv = 40, volume = 1000}, water = false}",
    );
    assert!(t.get::<Value>("water").unwrap().is_nil());
}

#[test]
fn bottles_match_the_kernel() {
    let h = host();
    let lot = Lot::volume(1203.0, 17.5, Composition::abv(40.0));
    let want = process::bottling(&k(), &lot, 0.7).unwrap();
    let t = table(
        &h,
        "m:bottles{volume = 1203, abv = 40, t = 17.5, size = 0.7}",
    );
    assert_eq!(get(&t, "count"), want.bottles as f64);
    assert!(matches!(
        t.get::<Value>("count").unwrap(),
        Value::Integer(_)
    ));
    assert_eq!(get(&t, "remainder"), want.remainder_l);
    assert_eq!(get(&t, "volume"), want.volume_20);
}

#[test]
fn units_match_the_kernel() {
    let h = host();
    type Case = (&'static str, fn(f64) -> f64, f64);
    let cases: [Case; 8] = [
        ("f_to_c", units::f_to_c, 60.0),
        ("c_to_f", units::c_to_f, 15.5),
        ("gal_to_l", units::us_gal_to_l, 53.0),
        ("l_to_gal", units::l_to_us_gal, 200.0),
        ("lb_to_kg", units::lb_to_kg, 81000.0),
        ("kg_to_lb", units::kg_to_lb, 12.5),
        ("g_cm3_to_kg_m3", units::g_cm3_to_kg_m3, 0.94805),
        ("kg_m3_to_g_cm3", units::kg_m3_to_g_cm3, 948.05),
    ];
    for (name, f, x) in cases {
        let got = eval(&h, &format!("units.{name}({x:?})"));
        match got.iter().next() {
            Some(Value::Number(v)) => assert_eq!(*v, f(x), "{name}"),
            other => panic!("{name}: {other:?}"),
        }
        // Element-wise over an array, giving a vector.
        let got = eval(&h, &format!("units.{name}{{{x:?}, 1}}[1]"));
        match got.iter().next() {
            Some(Value::Number(v)) => assert_eq!(*v, f(x), "{name} array"),
            other => panic!("{name}: {other:?}"),
        }
    }
    fails_with(&h, "units.f_to_c('60')", &["units.f_to_c", "number"]);
    fails_with(&h, "units.gal_to_l(0/0)", &["units.gal_to_l", "finite"]);
}

// ---- errors --------------------------------------------------------------

#[test]
fn lot_errors_say_what_is_wrong() {
    let h = host();
    fails_with(
        &h,
        "m:pure_alcohol{abv = 40}",
        &["pure_alcohol", "amount is missing", "volume", "mass"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{volume = 10, mass = 9, abv = 40}",
        &["pure_alcohol", "not both"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{volume = -5, abv = 40}",
        &["pure_alcohol", "volume = -5", "outside"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{mass = -1, abv = 40, air = true}",
        &["pure_alcohol", "-1", "outside"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{volume = 0/0, abv = 40}",
        &["pure_alcohol", "volume", "finite", "NaN"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{volume = 10, abv = 0/0}",
        &["pure_alcohol", "abv", "finite"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{volume = 10}",
        &["pure_alcohol", "composition", "abv"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{volume = 10, abv = 40, proof = 80}",
        &["pure_alcohol", "exactly one composition key"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{volume = 10, abv = 140}",
        &["pure_alcohol", "140"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{volume = 10, abv = 40, colour = 'amber'}",
        &["pure_alcohol", "unknown key 'colour'"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{volume = '10', abv = 40}",
        &["pure_alcohol", "volume must be a number", "string"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{volume = {1, 2}, abv = 40}",
        &["pure_alcohol", "volume must be a number"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{volume = 10, abv = {40, 41}}",
        &["pure_alcohol", "abv", "single number"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{volume = 10, abv = 40, air = true}",
        &["air = true goes with mass"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{mass = 10, abv = 40, air = 'yes'}",
        &["air must be true or false"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{mass = 10, abv = 40, air_density = 1.1}",
        &["air_density", "air = true"],
    );
    fails_with(
        &h,
        "m:pure_alcohol{volume = 10, abv = 40, t = 80}",
        &["pure_alcohol", "80", "outside"],
    );
    fails_with(&h, "m:pure_alcohol(5)", &["pure_alcohol", "table"]);
}

#[test]
fn reduce_errors_say_what_is_wrong() {
    let h = host();
    fails_with(
        &h,
        "m:reduce{volume = 100, abv = 40, target = 50}",
        &[
            "reduce",
            "cannot meet the target",
            "below the lot's strength",
        ],
    );
    fails_with(
        &h,
        "m:reduce{volume = 100, abv = 40, target = 40}",
        &["reduce", "cannot meet the target"],
    );
    fails_with(
        &h,
        "m:reduce{volume = 100, abv = 40, target = 0}",
        &["reduce", "above zero"],
    );
    fails_with(
        &h,
        "m:reduce{volume = 100, abv = 40}",
        &["reduce", "target is required"],
    );
    fails_with(
        &h,
        "m:reduce{volume = 100, abv = 40, target = 0/0}",
        &["reduce", "target", "finite"],
    );
    fails_with(
        &h,
        "m:reduce{volume = 100, abv = 40, target = {proof = 60, abv = 30}}",
        &["reduce: target", "exactly one composition key"],
    );
    fails_with(
        &h,
        "m:reduce{volume = 100, abv = 40, target = 30, water_t = 95}",
        &["reduce", "water temperature", "95"],
    );
    fails_with(
        &h,
        "m:reduce{abv = 40, target = 30}",
        &["reduce", "amount is missing"],
    );
    fails_with(
        &h,
        "m:reduce{volume = 0, abv = 40, target = 30}",
        &["reduce", "greater than zero"],
    );
}

#[test]
fn blend_and_plan_errors_name_the_lot_and_key() {
    let h = host();
    fails_with(
        &h,
        "m:blend{{volume = 1, abv = 40}, {volume = 1, abvv = 3}}",
        &["blend: lot 2", "unknown key 'abvv'"],
    );
    fails_with(
        &h,
        "m:blend{{volume = 1, abv = 40}, {abv = 3}}",
        &["blend: lot 2", "amount is missing"],
    );
    fails_with(
        &h,
        "m:blend{{volume = 1, abv = 40}, {volume = 1, abv = 30}, {mass = -3, abv = 3}}",
        &["blend: lot 3", "mass = -3"],
    );
    fails_with(
        &h,
        "m:blend{{volume = 1, abv = 40}, {volume = 0/0, abv = 30}}",
        &["blend: lot 2", "volume", "finite"],
    );
    fails_with(&h, "m:blend{}", &["blend", "at least one lot"]);
    fails_with(
        &h,
        "m:blend{volume = 1, abv = 40}",
        &["blend", "must be a list", "each lot in its own table"],
    );
    fails_with(
        &h,
        "m:blend{{volume = 1, abv = 40}, 7}",
        &["blend: lot 2", "table"],
    );
    fails_with(
        &h,
        "m:blend{{volume = 0, abv = 40}}",
        &["blend", "greater than zero"],
    );
    fails_with(
        &h,
        "m:plan_blend{lots = {{abv = 30}}, target = {abv = 40, volume = 10}}",
        &["plan_blend", "stronger than every lot"],
    );
    fails_with(
        &h,
        "m:plan_blend{lots = {{abv = 60}, {abv = 50, price = 3}}, target = {abv = 40, volume = 10}}",
        &["plan_blend: lot 2", "unknown key 'price'"],
    );
    fails_with(
        &h,
        "m:plan_blend{lots = {{abv = 60, limit = 5, limit_mass = 4}}, target = {abv = 40, volume = 10}}",
        &["plan_blend: lot 1", "not both"],
    );
    fails_with(
        &h,
        "m:plan_blend{lots = {{abv = 60, cost = -1}}, target = {abv = 40, volume = 10}}",
        &["plan_blend", "lot 1", "cost"],
    );
    fails_with(
        &h,
        "m:plan_blend{lots = {{abv = 60, limit = 5}}, target = {abv = 40, volume = 1000}}",
        &["plan_blend", "not enough"],
    );
    fails_with(
        &h,
        "m:plan_blend{lots = {{abv = 60}}, target = {abv = 40}}",
        &["plan_blend: target", "volume is required"],
    );
    fails_with(
        &h,
        "m:plan_blend{lots = {{abv = 60}}}",
        &["plan_blend", "target is required"],
    );
    fails_with(
        &h,
        "m:plan_blend{lots = {{abv = 60}}, target = {abv = 40, volume = 10}, water = 3}",
        &["plan_blend", "water must be a table"],
    );
    fails_with(
        &h,
        "m:bottles{volume = 10, abv = 40}",
        &["bottles", "size is required"],
    );
    fails_with(
        &h,
        "m:bottles{volume = 10, abv = 40, size = 0}",
        &["bottles", "bottle size"],
    );
}

// ---- conservation --------------------------------------------------------

#[test]
fn blends_and_reductions_conserve_mass_and_alcohol() {
    let h = host();
    let model = k();
    let lot = (1.0f64..5000.0, 0.0f64..100.0, 0.0f64..35.0);
    let mut runner = TestRunner::new(Config {
        cases: 64,
        ..Config::default()
    });
    runner
        .run(
            &(prop::collection::vec(lot, 1..5), 0.05f64..0.95),
            |(lots, frac)| {
                let src: Vec<String> = lots
                    .iter()
                    .map(|(v, abv, t)| format!("{{volume = {v:?}, abv = {abv:?}, t = {t:?}}}"))
                    .collect();
                let b = table(&h, &format!("m:blend{{{}}}", src.join(", ")));
                let (mut mass, mut alcohol) = (0.0, 0.0);
                for (v, abv, t) in &lots {
                    let p =
                        process::pure_alcohol(&model, &Lot::volume(*v, *t, Composition::abv(*abv)))
                            .unwrap();
                    mass += p.mass;
                    alcohol += p.mass * p.w;
                }
                prop_assert!(close(get(&b, "mass"), mass, 1e-12));
                prop_assert!(close(get(&b, "mass") * get(&b, "w"), alcohol, 1e-9));
                prop_assert!(close(
                    get(&b, "lots_volume") - get(&b, "volume"),
                    get(&b, "contraction"),
                    1e-9
                ));
                // Reduce the blend (when it has alcohol) to a fraction of its strength.
                if get(&b, "abv") > 0.5 {
                    let target = get(&b, "abv") * frac;
                    let r = table(
                        &h,
                        &format!(
                            "m:reduce{{mass = {:?}, w = {:?}, target = {target:?}}}",
                            get(&b, "mass"),
                            get(&b, "w")
                        ),
                    );
                    prop_assert!(close(
                        get(&r, "mass"),
                        get(&b, "mass") + get(&r, "water_kg"),
                        1e-12
                    ));
                    prop_assert!(close(
                        get(&r, "mass") * get(&r, "w"),
                        get(&b, "mass") * get(&b, "w"),
                        1e-9
                    ));
                    prop_assert!(close(get(&r, "abv"), target, 1e-9));
                    prop_assert!(close(
                        get(&r, "lot_volume") + get(&r, "water") - get(&r, "volume"),
                        get(&r, "contraction"),
                        1e-9
                    ));
                    // Pure alcohol is conserved by adding water.
                    let before = table(
                        &h,
                        &format!(
                            "m:pure_alcohol{{mass = {:?}, w = {:?}}}",
                            get(&b, "mass"),
                            get(&b, "w")
                        ),
                    );
                    let after = get(&r, "volume") * get(&r, "abv") / 100.0;
                    prop_assert!(close(get(&before, "lpa"), after, 1e-9));
                }
                Ok(())
            },
        )
        .unwrap();
}

// ---- help ----------------------------------------------------------------

#[test]
fn help_gives_units_method_and_cautions() {
    let h = host();
    for name in [
        "mixture:pure_alcohol",
        "mixture:reduce",
        "mixture:blend",
        "mixture:plan_blend",
        "mixture:bottles",
    ] {
        let text = h.help_text(name);
        assert!(text.contains("20 °C"), "{name}: units");
        assert!(text.contains("prescribe"), "{name}: excise caution");
        assert!(text.contains("flammable"), "{name}: safety caution");
    }
    assert!(h
        .help_text("mixture:plan_blend")
        .contains("linear programme"));
    assert!(h
        .help_text("mixture:pure_alcohol")
        .contains("proof gallons"));
    assert!(h.help_text("mixture").contains("plan_blend"));
    assert!(h.help_text("units").contains("units.gal_to_l"));
    assert!(h.help_text("units.lb_to_kg").contains("0.45359237"));
    for name in ["files.read_csv", "files.write_csv", "files.mkdir"] {
        assert!(!h.help_text(name).starts_with("no help"), "{name}");
    }
    // help(value) finds the method, and completion offers it.
    eval(&h, "help(m.reduce)");
    assert!(h.take_output().contains("m:reduce{"));
    let line = "m:plan_";
    let (_, cands) = h.completions(line, line.len());
    assert!(cands.iter().any(|c| c == "plan_blend"), "{cands:?}");
}

// ---- files and charts ----------------------------------------------------

fn temp_host() -> (tempfile::TempDir, Host) {
    let dir = tempfile::tempdir().unwrap();
    let h = host_with(HostOptions {
        allow_paths: vec![dir.path().to_path_buf()],
        ..HostOptions::default()
    });
    (dir, h)
}

#[test]
fn csv_rows_round_trip_with_types() {
    let (dir, h) = temp_host();
    let f = lua_path(&dir.path().join("t.csv"));
    eval(
        &h,
        &format!(
            "files.write_csv({f}, {{'tank', 'abv', 'note'}}, {{\
             {{tank = 'T01', abv = 40.25, note = 'a, \"quoted\" note'}}, \
             {{'T02', 3, nil}}}})"
        ),
    );
    let text = std::fs::read_to_string(dir.path().join("t.csv")).unwrap();
    assert_eq!(
        text,
        "tank,abv,note\nT01,40.25,\"a, \"\"quoted\"\" note\"\nT02,3,\n"
    );
    let t = table(
        &h,
        &format!(
            "local rows, cols = files.read_csv({f}); \
             return {{n = #rows, cols = table.concat(cols, '|'), abv1 = rows[1].abv, \
             abv2 = math.type(rows[2].abv), note2 = rows[2].note == nil, note1 = rows[1].note}}"
        ),
    );
    assert_eq!(get(&t, "n"), 2.0);
    assert_eq!(t.get::<String>("cols").unwrap(), "tank|abv|note");
    assert_eq!(get(&t, "abv1"), 40.25);
    assert_eq!(t.get::<String>("abv2").unwrap(), "integer");
    assert!(t.get::<bool>("note2").unwrap());
    assert_eq!(t.get::<String>("note1").unwrap(), "a, \"quoted\" note");
}

#[test]
fn csv_errors_name_file_line_and_column() {
    let (dir, h) = temp_host();
    let bad = dir.path().join("bad.csv");
    std::fs::write(&bad, "tank,reading\nT01,964.1\nT02,NaN\n").unwrap();
    let f = lua_path(&bad);
    fails_with(
        &h,
        &format!("files.read_csv({f})"),
        &["files.read_csv", "bad.csv:3:", "column 2", "reading", "NaN"],
    );
    std::fs::write(&bad, "tank,reading\nT01,964.1\nT02\n").unwrap();
    fails_with(
        &h,
        &format!("files.read_csv({f})"),
        &["bad.csv:3:", "fields"],
    );
    std::fs::write(&bad, "tank,reading\nT01,964.1\nT02,\n").unwrap();
    fails_with(
        &h,
        &format!("files.read_csv({f})"),
        &["bad.csv:3:", "empty"],
    );
    let t = table(
        &h,
        &format!("local r = files.read_csv({f}, {{allow_empty = true}}); return r[2]"),
    );
    assert!(t.get::<Value>("reading").unwrap().is_nil());
    fails_with(
        &h,
        &format!("files.read_csv({f}, {{allow_emty = true}})"),
        &["unknown option 'allow_emty'"],
    );
    fails_with(
        &h,
        "files.read_csv('/etc/passwd')",
        &["files.read_csv", "outside"],
    );
    fails_with(
        &h,
        &format!(
            "files.write_csv({}, {{'a'}}, {{{{a = 0/0}}}})",
            lua_path(&dir.path().join("x.csv"))
        ),
        &["files.write_csv", "row 1", "'a'", "finite"],
    );
    fails_with(
        &h,
        &format!(
            "files.write_csv({}, {{'a'}}, {{{{b = 1}}}})",
            lua_path(&dir.path().join("x.csv"))
        ),
        &["files.write_csv", "'b'", "not one of the columns"],
    );
    assert!(!dir.path().join("x.csv").exists(), "no file after an error");
}

#[test]
fn mkdir_only_under_allowed_paths() {
    let (dir, h) = temp_host();
    let sub = dir.path().join("out").join("day1");
    eval(&h, &format!("files.mkdir({})", lua_path(&sub)));
    assert!(sub.is_dir());
    // Again: nothing happens.
    eval(&h, &format!("files.mkdir({})", lua_path(&sub)));
    let outside = std::env::temp_dir().join("meniscus-mkdir-outside-test");
    fails_with(
        &h,
        &format!("files.mkdir({})", lua_path(&outside)),
        &["files.mkdir", "outside"],
    );
    assert!(!outside.exists());
    fails_with(
        &h,
        &format!(
            "files.mkdir({})",
            lua_path(&dir.path().join("new").join("..").join("..").join("escape"))
        ),
        &["files.mkdir", "'..'"],
    );
    let file = dir.path().join("f.txt");
    std::fs::write(&file, "x").unwrap();
    fails_with(
        &h,
        &format!("files.mkdir({})", lua_path(&file)),
        &["not a directory"],
    );
}

#[cfg(feature = "plot")]
#[test]
fn bar_chart_is_written_as_svg() {
    let (dir, h) = temp_host();
    let f = dir.path().join("c.svg");
    eval(
        &h,
        &format!(
            "plot.bars({}, {{title = 'LPA per tank', categories = {{'T01', 'T02'}}, \
             series = {{{{name = 'LPA', values = {{1369.9, 1493.2}}}}}}, y_label = 'litres'}})",
            lua_path(&f)
        ),
    );
    let svg = std::fs::read_to_string(&f).unwrap();
    assert!(svg.starts_with("<svg") && svg.contains("T02") && svg.contains("LPA per tank"));
    fails_with(
        &h,
        &format!(
            "plot.bars({}, {{categories = {{'T01', 'T02'}}, series = {{{{name = 'x', values = {{1}}}}}}}})",
            lua_path(&dir.path().join("d.svg"))
        ),
        &["plot.bars", "1 values for 2 categories"],
    );
    assert!(!dir.path().join("d.svg").exists());
}
