//! Throughput of the Lua API (a benchmark, not a test: it prints figures
//! and checks nothing). Run with `cargo bench --bench lua`.
//!
//! - forward density of 10⁶ points given as a Lua table (the call alone;
//!   the table is built beforehand and its build time printed apart);
//! - inverse density → strength of 10⁶ points;
//! - a Lua loop of scalar `m:density{w = …}` calls;
//! - the cost of the count hook on a plain Lua loop, for several N.
//!
//! Each figure is the best of 11 runs of the time this thread spent on a
//! CPU (from /proc/thread-self/schedstat on Linux, so time the thread
//! waited for a shared CPU is not counted; wall-clock time elsewhere).

use std::time::{Duration, Instant};

use meniscus::lua::{Host, HostOptions};
use mlua::{HookTriggers, Lua, VmState};

const N: usize = 1_000_000;
const RUNS: usize = 11;

fn best(mut f: impl FnMut() -> Duration) -> Duration {
    (0..RUNS).map(|_| f()).min().unwrap_or_default()
}

/// Nanoseconds this thread has run on a CPU, where the OS says.
fn cpu_ns() -> Option<u64> {
    let s = std::fs::read_to_string("/proc/thread-self/schedstat").ok()?;
    s.split_whitespace().next()?.parse().ok()
}

/// Time of `f`: CPU time of this thread where available, else wall time.
fn measure(f: impl FnOnce()) -> Duration {
    let (c0, t0) = (cpu_ns(), Instant::now());
    f();
    match (c0, cpu_ns()) {
        (Some(a), Some(b)) => Duration::from_nanos(b.saturating_sub(a)),
        _ => t0.elapsed(),
    }
}

fn timed(h: &Host, src: &str) -> Duration {
    measure(|| {
        if let Err(e) = h.eval(src, "=bench") {
            panic!("{src}: {}", e.message);
        }
    })
}

fn ns_per(d: Duration, n: usize) -> f64 {
    d.as_secs_f64() * 1e9 / n as f64
}

fn main() {
    println!(
        "timing: {}",
        if cpu_ns().is_some() {
            "CPU time of the benchmark thread"
        } else {
            "wall-clock time"
        }
    );
    let h = Host::new(HostOptions::default()).expect("host");
    h.eval("m = mixture.ethanol_water()", "=bench")
        .expect("setup");

    let build_w = format!("w = {{}} for i = 1, {N} do w[i] = (i - 1) / {N} end");
    let build = best(|| timed(&h, &build_w));
    println!(
        "building a Lua table of 10^6 numbers:          {:8.1} ms",
        build.as_secs_f64() * 1e3
    );

    let fwd = best(|| timed(&h, "d = m:density{w = w, t = 20}"));
    println!(
        "forward density, 10^6 w from a Lua table:      {:8.1} ns/point",
        ns_per(fwd, N)
    );
    let fwd_t = best(|| timed(&h, "d = m:density{w = w, t = 15}"));
    println!(
        "forward density at 15 °C, same:                {:8.1} ns/point",
        ns_per(fwd_t, N)
    );
    h.eval("wv = vec(w)", "=bench").expect("vector");
    let fwd_v = best(|| timed(&h, "d = m:density{w = wv, t = 20}"));
    println!(
        "forward density, 10^6 w from a vector:         {:8.1} ns/point",
        ns_per(fwd_v, N)
    );
    h.eval(
        &format!("a = {{}} for i = 1, {N} do a[i] = 100 * (i - 1) / {N} end"),
        "=bench",
    )
    .expect("abv table");
    let fwd_abv = best(|| timed(&h, "d = m:density{abv = a, t = 20}"));
    println!(
        "forward density from % vol (solves for w):     {:8.1} ns/point",
        ns_per(fwd_abv, N)
    );

    h.eval(
        &format!("rho = {{}} for i = 1, {N} do rho[i] = 790 + 208 * (i - 1) / {N} end"),
        "=bench",
    )
    .expect("density table");
    let inv = best(|| timed(&h, "s = m:strength{density = rho, t = 20}"));
    println!(
        "inverse density -> strength, 10^6 points:      {:8.1} ns/point",
        ns_per(inv, N)
    );

    let empty = best(|| {
        timed(
            &h,
            &format!("for i = 1, {N} do local x = {{w = i / {N}}} end"),
        )
    });
    let scalar = best(|| {
        timed(
            &h,
            &format!("for i = 1, {N} do local d = m:density{{w = i / {N}}} end"),
        )
    });
    println!(
        "Lua loop of scalar m:density{{w = …}}:           {:8.1} ns/call ({:.1} ns of it the loop and table)",
        ns_per(scalar, N),
        ns_per(empty, N)
    );
    let scalar_abv = best(|| {
        timed(
            &h,
            &format!("for i = 1, {N} do local d = m:density{{abv = 100 * i / {N}, t = 15}} end"),
        )
    });
    println!(
        "Lua loop of scalar m:density{{abv = …, t = …}}:   {:8.1} ns/call",
        ns_per(scalar_abv, N)
    );

    // The count hook: a plain loop with no hook and with one every n
    // instructions (the hook body an atomic load, as in the host).
    let loop_src = "local s = 0 for i = 1, 2e7 do s = s + i end return s";
    let flag = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false));
    for every in [None, Some(1_000u32), Some(10_000), Some(100_000)] {
        let lua = Lua::new();
        if let Some(n) = every {
            let f = flag.clone();
            lua.set_global_hook(HookTriggers::new().every_nth_instruction(n), move |_, _| {
                if f.load(std::sync::atomic::Ordering::Relaxed) {
                    Err(mlua::Error::runtime("interrupted"))
                } else {
                    Ok(VmState::Continue)
                }
            })
            .expect("hook");
        }
        let d = best(|| measure(|| lua.load(loop_src).exec().expect("loop")));
        let label = match every {
            None => "no hook".to_string(),
            Some(n) => format!("hook every {n}"),
        };
        println!(
            "plain Lua loop iteration, {label:<18}    {:8.2} ns/iteration",
            ns_per(d, 20_000_000)
        );
    }
    let host_loop = best(|| timed(&h, "local s = 0 for i = 1, 2e7 do s = s + i end return s"));
    println!(
        "plain Lua loop iteration in the host:          {:8.2} ns/iteration",
        ns_per(host_loop, 20_000_000)
    );
}
