//! The plugin host: loading and validation (each way a plugin can be wrong
//! is reported with the path and the reason, and skipped, while the others
//! and the session go on), isolation between plugins, the search order of
//! the plugin directories, and the loaded plugins in help, completion,
//! sheet formulas, `plugins()` and the REPL's `:plugins`.
#![cfg(feature = "lua")]

use std::path::{Path, PathBuf};
use std::time::Duration;

use meniscus::lua::{Host, HostOptions, PluginInfo};
use mlua::Value;

mod common;
use common::text as eval_str;

/// A plugin source with the given name and one function `f` returning `ret`.
fn plugin(name: &str, ret: &str) -> String {
    format!(
        "return {{ name = {name:?}, version = '0.1', api = 1, description = 'test plugin',
           functions = {{ f = {{ fn = function(x) return {ret} end, doc = 'returns a value',
                                args = {{ {{ name = 'x', unit = 'L', doc = 'anything' }} }} }} }} }}"
    )
}

fn write(dir: &Path, file: &str, source: &str) -> PathBuf {
    let p = dir.join(file);
    if let Some(parent) = p.parent() {
        std::fs::create_dir_all(parent).unwrap();
    }
    std::fs::write(&p, source).unwrap();
    p
}

fn host_with_plugins(dirs: &[&Path]) -> Host {
    common::quiet_host(HostOptions {
        plugin_dirs: dirs.iter().map(|d| d.to_path_buf()).collect(),
        standard_plugin_dirs: false,
        timeout: Some(Duration::from_secs(2)),
        ..HostOptions::default()
    })
}

fn names(plugins: &[PluginInfo]) -> Vec<&str> {
    plugins.iter().map(|p| p.name.as_str()).collect()
}

/// One problem for `file`, whose message contains every fragment.
fn assert_skipped(h: &Host, file: &str, fragments: &[&str]) {
    let problems = h.plugin_problems();
    let p = problems
        .iter()
        .find(|p| p.path.file_name().is_some_and(|n| n == file) || p.path.ends_with(file))
        .unwrap_or_else(|| panic!("{file} was not reported; problems: {problems:?}"));
    for f in fragments {
        assert!(p.message.contains(f), "{file}: {:?} lacks {f:?}", p.message);
    }
    assert!(
        !p.message.contains('\n'),
        "{file}: one line: {:?}",
        p.message
    );
    let stem = Path::new(file).file_stem().unwrap().to_string_lossy();
    assert!(
        !h.plugins().iter().any(|i| i.path.ends_with(file)),
        "{stem} was loaded anyway"
    );
}

#[test]
fn a_valid_plugin_is_a_namespace_with_help_completion_and_formulas() {
    let dir = tempfile::tempdir().unwrap();
    let path = write(dir.path(), "cellar.lua", &plugin("cellar", "x * 2"));
    let h = host_with_plugins(&[dir.path()]);
    assert!(h.plugin_problems().is_empty(), "{:?}", h.plugin_problems());
    let loaded = h.plugins();
    assert_eq!(loaded.len(), 1);
    assert_eq!(loaded[0].name, "cellar");
    assert_eq!(loaded[0].version, "0.1");
    assert_eq!(loaded[0].description, "test plugin");
    assert_eq!(loaded[0].api, 1);
    assert_eq!(loaded[0].path, path);
    assert_eq!(loaded[0].functions, vec!["f"]);

    assert_eq!(eval_str(&h, "tostring(cellar.f(21))"), "42");
    assert_eq!(eval_str(&h, "type(cellar)"), "table");
    // plugins() from Lua.
    assert_eq!(eval_str(&h, "plugins()[1].name"), "cellar");
    assert_eq!(eval_str(&h, "plugins()[1].version"), "0.1");
    assert_eq!(eval_str(&h, "plugins()[1].description"), "test plugin");
    assert_eq!(
        eval_str(&h, "plugins()[1].path"),
        path.display().to_string()
    );
    // Help: signature, argument units, origin.
    let help = h.help_text("cellar.f");
    assert!(help.starts_with("cellar.f(x)"), "{help}");
    assert!(help.contains("x (L): anything"), "{help}");
    assert!(help.contains("Plugin cellar 0.1"), "{help}");
    assert!(h.help_text("cellar").contains("test plugin"));
    h.take_output();
    h.eval("help(cellar.f)", "=t").unwrap();
    assert!(h.take_output().starts_with("cellar.f(x)"));
    // Completion of the namespace and its functions.
    assert!(h.completions("cel", 3).1.contains(&"cellar".to_string()));
    assert_eq!(h.completions("cellar.", 7).1, vec!["f"]);
    // Callable from sheet formulas, expression and function.
    h.eval(
        "s = sheet.new{'v'}; s:add{v = 5}
         s:formula('w', 'cellar.f(v)')
         s:formula('z', function(r) return cellar.f(r.v) + 1 end)",
        "=t",
    )
    .unwrap();
    assert_eq!(eval_str(&h, "tostring(s:get(1, 'w'))"), "10.0");
    assert_eq!(eval_str(&h, "tostring(s:get(1, 'z'))"), "11.0");
    // The namespace is read-only for scripts too.
    let e = h.eval("cellar.f = nil", "=t").unwrap_err();
    assert!(e.message.contains("read-only"), "{}", e.message);
    let e = h.eval("rawset(cellar, 'f', print)", "=t").unwrap_err();
    assert!(e.message.contains("read-only"), "{}", e.message);
    let e = h.eval("setmetatable(cellar, nil)", "=t").unwrap_err();
    assert!(e.message.contains("protected"), "{}", e.message);
    assert_eq!(eval_str(&h, "tostring(cellar.f(1))"), "2");
    // Reset loads the plugins again.
    let mut h = h;
    h.reset().unwrap();
    assert_eq!(names(&h.plugins()), vec!["cellar"]);
}

#[test]
fn each_invalid_plugin_is_reported_and_skipped() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write(d, "good.lua", &plugin("good", "'fine'"));
    // Names.
    write(d, "dash.lua", &plugin("my-site", "1"));
    write(d, "keyword.lua", &plugin("end", "1"));
    write(d, "builtin.lua", &plugin("sheet", "1"));
    write(d, "library.lua", &plugin("string", "1"));
    write(d, "topic.lua", &plugin("vector", "1"));
    write(d, "underscore.lua", &plugin("_x", "1"));
    write(d, "number.lua", &plugin("9lives", "1"));
    // API versions.
    write(
        d,
        "api2.lua",
        &plugin("future", "1").replace("api = 1", "api = 2"),
    );
    write(
        d,
        "noapi.lua",
        &plugin("noapi", "1").replace("api = 1,", ""),
    );
    write(
        d,
        "apistr.lua",
        &plugin("apistr", "1").replace("api = 1", "api = '1'"),
    );
    // Missing or malformed fields.
    write(
        d,
        "noversion.lua",
        &plugin("noversion", "1").replace("version = '0.1',", ""),
    );
    write(
        d,
        "nodesc.lua",
        &plugin("nodesc", "1").replace("description = 'test plugin',", ""),
    );
    write(
        d,
        "nofunctions.lua",
        "return { name = 'nofunctions', version = '1', api = 1, description = 'x' }",
    );
    write(
        d,
        "emptyfunctions.lua",
        "return { name = 'emptyf', version = '1', api = 1, description = 'x', functions = {} }",
    );
    write(
        d,
        "nodoc.lua",
        &plugin("nodoc", "1").replace("doc = 'returns a value',", ""),
    );
    write(
        d,
        "nofn.lua",
        &plugin("nofn", "1").replace("fn = function(x) return 1 end,", ""),
    );
    write(
        d,
        "noargs.lua",
        "return { name = 'noargs', version = '1', api = 1, description = 'x',
           functions = { f = { fn = print, doc = 'd' } } }",
    );
    write(
        d,
        "badarg.lua",
        &plugin("badarg", "1").replace("name = 'x', ", ""),
    );
    write(
        d,
        "typo.lua",
        &plugin("typo", "1").replace("description =", "descripton ="),
    );
    write(d, "notable.lua", "return 42");
    // Load errors.
    write(d, "syntax.lua", "return { name = ");
    write(d, "runtime.lua", "local x = nil\nreturn x.y");
    write(d, "loop.lua", "while true do end");
    write(d, "memory.lua", "local s = ('x'):rep(1e8)");
    write(d, "io.lua", "io.open('/etc/passwd')\nreturn {}");
    // A package directory and a duplicate name.
    write(d, "pkg/init.lua", &plugin("pkg", "'from init'"));
    write(d, "zz_dup.lua", &plugin("good", "'second'"));

    let h = Host::new(HostOptions {
        plugin_dirs: vec![d.to_path_buf()],
        standard_plugin_dirs: false,
        timeout: Some(Duration::from_millis(500)),
        memory_limit: 64 * 1024 * 1024,
        ..HostOptions::default()
    })
    .unwrap();

    assert_eq!(names(&h.plugins()), vec!["good", "pkg"]);
    assert_skipped(
        &h,
        "dash.lua",
        &["\"my-site\"", "not a Lua identifier", "\"my_site\""],
    );
    assert_skipped(&h, "keyword.lua", &["\"end\"", "not a Lua identifier"]);
    assert_skipped(&h, "builtin.lua", &["\"sheet\"", "built-in"]);
    assert_skipped(&h, "library.lua", &["\"string\"", "built-in"]);
    assert_skipped(&h, "topic.lua", &["\"vector\"", "built-in"]);
    assert_skipped(&h, "underscore.lua", &["reserved"]);
    assert_skipped(&h, "number.lua", &["not a Lua identifier", "p_9lives"]);
    assert_skipped(&h, "api2.lua", &["api 2", "provides api 1"]);
    assert_skipped(&h, "noapi.lua", &["no field 'api'", "api = 1"]);
    assert_skipped(&h, "apistr.lua", &["'api' must be a whole number"]);
    assert_skipped(&h, "noversion.lua", &["no field 'version'"]);
    assert_skipped(&h, "nodesc.lua", &["no field 'description'"]);
    assert_skipped(&h, "nofunctions.lua", &["no field 'functions'"]);
    assert_skipped(&h, "emptyfunctions.lua", &["'functions' is empty"]);
    assert_skipped(&h, "nodoc.lua", &["functions.f has no field 'doc'"]);
    assert_skipped(&h, "nofn.lua", &["functions.f has no field 'fn'"]);
    assert_skipped(&h, "noargs.lua", &["functions.f has no field 'args'"]);
    assert_skipped(
        &h,
        "badarg.lua",
        &["functions.f.args[1] has no field 'name'"],
    );
    assert_skipped(&h, "typo.lua", &["unknown field 'descripton'"]);
    assert_skipped(
        &h,
        "notable.lua",
        &["must return the plugin table", "number 42"],
    );
    assert_skipped(&h, "syntax.lua", &["syntax.lua:1:"]);
    assert_skipped(&h, "runtime.lua", &["runtime.lua:2:", "attempt to index"]);
    assert_skipped(&h, "loop.lua", &["time limit"]);
    assert_skipped(&h, "memory.lua", &["not enough memory"]);
    assert_skipped(&h, "io.lua", &["io.lua:1:"]);
    let dup = d.join("good.lua").display().to_string();
    assert_skipped(&h, "zz_dup.lua", &["\"good\"", "already used", &dup]);

    // The session goes on and the good plugins work.
    assert_eq!(eval_str(&h, "good.f()"), "fine");
    assert_eq!(eval_str(&h, "pkg.f()"), "from init");
    assert_eq!(eval_str(&h, "tostring(('x'):rep(3))"), "xxx");
    assert_eq!(eval_str(&h, "type(future)"), "nil");
}

#[test]
fn a_plugin_cannot_tamper_with_another_or_with_shared_tables() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write(
        d,
        "aaa_victim.lua",
        &plugin(
            "victim",
            "string.upper('ok') .. ':' .. tostring(math.pi > 3)",
        ),
    );
    let attacks = [
        ("b1_assign.lua", "victim.f = function() return 'pwned' end"),
        (
            "b2_rawset.lua",
            "rawset(victim, 'f', function() return 'pwned' end)",
        ),
        (
            "b3_string.lua",
            "string.upper = function() return 'pwned' end",
        ),
        (
            "b4_strmeta.lua",
            "getmetatable('').__index = { upper = function() return 'pwned' end }",
        ),
        ("b5_G.lua", "_G.string.upper = nil"),
        ("b6_load.lua", "load('string.upper = nil')()"),
        ("b7_gload.lua", "_G.load('math.pi = 0')()"),
        (
            "b8_setmt.lua",
            "setmetatable(victim, { __index = function() return print end })",
        ),
        ("b9_insert.lua", "table.insert(math, 1)"),
        ("c1_mixture.lua", "mixture.ethanol_water = nil"),
        ("c2_rawset_lib.lua", "rawset(math, 'pi', 0)"),
    ];
    for (file, attack) in attacks {
        write(
            d,
            file,
            &format!("{attack}\n{}", plugin(&file.replace(".lua", ""), "1")),
        );
    }
    // A plugin may keep globals of its own: they stay private.
    write(
        d,
        "d_private.lua",
        &format!("counter = 41\n{}", plugin("private", "counter + 1")),
    );
    // A plugin function that tampers when called fails then, harmlessly.
    write(
        d,
        "e_later.lua",
        &plugin("later", "(function() string.upper = nil end)()"),
    );

    let h = host_with_plugins(&[d]);
    for (file, _) in attacks {
        // Code compiled with load() is cited as (load).
        let place = if file.contains("load") {
            "(load):1:".to_string()
        } else {
            format!("{file}:1:")
        };
        assert_skipped(&h, file, &[&place]);
    }
    assert!(
        h.plugin_problems().len() == attacks.len(),
        "{:?}",
        h.plugin_problems()
    );
    assert_eq!(eval_str(&h, "victim.f()"), "OK:true");
    assert_eq!(eval_str(&h, "string.upper('x')"), "X");
    assert_eq!(eval_str(&h, "tostring(math.pi > 3)"), "true");
    assert_eq!(eval_str(&h, "type(mixture.ethanol_water)"), "function");
    assert_eq!(eval_str(&h, "type(counter)"), "nil");
    assert_eq!(eval_str(&h, "tostring(private.f())"), "42");
    let e = h.eval("later.f()", "=t").unwrap_err();
    assert!(e.message.contains("read-only"), "{}", e.message);
    assert!(e.message.contains("e_later.lua:"), "{}", e.message);
    assert_eq!(eval_str(&h, "victim.f()"), "OK:true");
}

#[test]
#[cfg(feature = "cli")]
fn plugin_directories_are_searched_in_order() {
    let work = tempfile::tempdir().unwrap();
    let config = tempfile::tempdir().unwrap();
    let extra = tempfile::tempdir().unwrap();
    write(
        &work.path().join("plugins"),
        "site.lua",
        &plugin("site", "'local'"),
    );
    write(
        &config.path().join("meniscus/plugins"),
        "site.lua",
        &plugin("site", "'config'"),
    );
    write(
        &config.path().join("meniscus/plugins"),
        "user.lua",
        &plugin("user", "'config'"),
    );
    write(extra.path(), "user.lua", &plugin("user", "'extra'"));
    write(extra.path(), "more.lua", &plugin("more", "'extra'"));
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_meniscus"))
        .current_dir(work.path())
        .env("XDG_CONFIG_HOME", config.path())
        .env("MENISCUS_HISTORY", "")
        .stdin(std::process::Stdio::null())
        .args(["--plugins"])
        .arg(extra.path())
        .args(["eval", "site.f() .. ' ' .. user.f() .. ' ' .. more.f()"])
        .output()
        .unwrap();
    let out = String::from_utf8_lossy(&o.stdout);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(out.trim(), "local config extra", "stderr: {err}");
    // The later duplicates are reported on stderr with path and reason.
    assert_eq!(err.lines().count(), 2, "{err}");
    assert!(err.contains("meniscus: plugin "), "{err}");
    assert!(
        err.contains(
            &config
                .path()
                .join("meniscus/plugins/site.lua")
                .display()
                .to_string()
        ),
        "{err}"
    );
    assert!(
        err.contains(&extra.path().join("user.lua").display().to_string()),
        "{err}"
    );
    assert!(err.contains("already used"), "{err}");
    assert!(o.status.success());
}

#[test]
#[cfg(feature = "cli")]
fn skipped_plugins_are_reported_on_stderr_and_the_command_goes_on() {
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        "bad.lua",
        &plugin("bad", "1").replace("api = 1", "api = 7"),
    );
    write(dir.path(), "ok.lua", &plugin("ok", "'yes'"));
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_meniscus"))
        .current_dir(dir.path())
        .env("XDG_CONFIG_HOME", dir.path())
        .env("MENISCUS_HISTORY", "")
        .stdin(std::process::Stdio::null())
        .arg("--plugins")
        .arg(dir.path())
        .args(["eval", "ok.f()"])
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(String::from_utf8_lossy(&o.stdout).trim(), "yes");
    assert!(o.status.success());
    let line = err.lines().next().unwrap_or_default();
    assert!(line.starts_with("meniscus: plugin "), "{err}");
    assert!(
        line.contains(&dir.path().join("bad.lua").display().to_string()),
        "{err}"
    );
    assert!(
        line.contains("api 7") && line.contains("provides api 1"),
        "{err}"
    );
}

#[test]
#[cfg(feature = "cli")]
fn the_repl_lists_loaded_and_skipped_plugins() {
    let dir = tempfile::tempdir().unwrap();
    write(dir.path(), "ok.lua", &plugin("ok", "1"));
    write(dir.path(), "broken.lua", "return {");
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_meniscus"))
        .current_dir(dir.path())
        .env("XDG_CONFIG_HOME", dir.path())
        .env("MENISCUS_HISTORY", "")
        .arg("--plugins")
        .arg(dir.path())
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .and_then(|mut c| {
            use std::io::Write;
            c.stdin.take().unwrap().write_all(b":plugins\n")?;
            c.wait_with_output()
        })
        .unwrap();
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(out.contains("loaded plugins:"), "{out}");
    assert!(out.contains("ok  0.1  test plugin"), "{out}");
    assert!(
        out.contains(&dir.path().join("ok.lua").display().to_string()),
        "{out}"
    );
    assert!(out.contains("broken.lua skipped"), "{out}");
    assert!(out.contains(&dir.path().display().to_string()), "{out}");
}

#[test]
fn the_example_plugin_loads_and_answers_from_its_tables() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("scripts/plugins");
    let h = host_with_plugins(&[&dir]);
    assert!(h.plugin_problems().is_empty(), "{:?}", h.plugin_problems());
    assert_eq!(names(&h.plugins()), vec!["brackenhollow"]);
    let num = |src: &str| -> f64 {
        match h.eval(src, "=t") {
            Ok(v) => match v.iter().next() {
                Some(Value::Number(x)) => *x,
                Some(Value::Integer(i)) => *i as f64,
                other => panic!("{src}: {other:?}"),
            },
            Err(e) => panic!("{src}: {}", e.message),
        }
    };
    // On a strapping-table row, and halfway between two rows.
    assert_eq!(num("brackenhollow.dip_volume('T02', 300)"), 690.0);
    assert_eq!(
        num("brackenhollow.dip_volume('T02', 450)"),
        (690.0 + 1560.0) / 2.0
    );
    let dip = num("brackenhollow.dip_for_volume('T02', 1000)");
    assert!((num(&format!("brackenhollow.dip_volume('T02', {dip})")) - 1000.0).abs() < 1e-9);
    // Pure alcohol at 20 °C: the kernel's volume correction times strength.
    let v = num("brackenhollow.dip_volume('T03', 600)");
    let lpa = num("brackenhollow.tank_lpa('T03', 600, 60, 13)");
    use meniscus::kernel::{Composition, Mixture};
    let m = meniscus::kernel::EthanolWater::new();
    let w = m.mass_fraction(Composition::abv(60.0)).unwrap();
    let want = m.volume_at(v, w, 13.0, 20.0).unwrap() * 0.6;
    assert!((lpa - want).abs() < 1e-9 * want, "{lpa} vs {want}");
    let e = h
        .eval("brackenhollow.dip_volume('T02', 5000)", "=t")
        .unwrap_err();
    assert!(
        e.message.contains("outside the strapping table"),
        "{}",
        e.message
    );
    let e = h.eval("brackenhollow.capacity('T99')", "=t").unwrap_err();
    assert!(e.message.contains("unknown tank \"T99\""), "{}", e.message);
}
