//! Sheets from Lua, through the host ([`Host`]) and the binary: formulas
//! (expression and function), recalculation order and cycles, the CSV round
//! trip, every malformed-CSV case as the Lua user meets it, the memory cap,
//! file access, and the workflow scripts in scripts/tables/ checked against
//! the kernel called directly.
#![cfg(feature = "lua")]

use std::path::Path;
use std::time::Duration;

use meniscus::kernel::sheet::{CellRef, ColumnData, CsvOptions, Sheet, Value as Cell};
use meniscus::kernel::{EthanolWater, HydrometerScale, Mixture};
use meniscus::lua::sheet::SheetUd;
use meniscus::lua::{Host, HostOptions};
use mlua::AnyUserData;
use proptest::prelude::*;

mod common;
use common::{err, eval, fails_with, num, text};

fn host_in(dir: &Path) -> Host {
    common::ethanol_water_host(HostOptions {
        timeout: Some(Duration::from_secs(60)),
        allow_paths: vec![dir.to_path_buf()],
        standard_plugin_dirs: false,
        ..HostOptions::default()
    })
}

fn host() -> Host {
    host_in(&std::env::temp_dir())
}

/// The kernel sheet behind a Lua global holding a sheet.
fn kernel_sheet(h: &Host, global: &str) -> Sheet {
    let ud: AnyUserData = h.lua().globals().get(global).expect("a sheet global");
    let s = ud.borrow::<SheetUd>().expect("a sheet");
    s.sheet().clone()
}

fn model() -> EthanolWater {
    EthanolWater::new()
}

// ------------------------------------------------------------ formulas

#[test]
fn expression_formulas_match_the_kernel_and_follow_edits() {
    let h = host();
    eval(
        &h,
        "s = sheet.new{'abv', 't'}
         s:add{abv = 40, t = 20}:add{abv = 60, t = 15}:add{96, 10}
         s:formula('rho', 'm:density{abv = abv, t = t}')",
    );
    let m = model();
    for (row, abv, t) in [(1, 40.0, 20.0), (2, 60.0, 15.0), (3, 96.0, 10.0)] {
        let want = m
            .density_of(meniscus::kernel::Composition::abv(abv), t)
            .unwrap();
        assert_eq!(num(&h, &format!("s:get({row}, 'rho')")), want);
    }
    eval(&h, "s:set(2, 't', 25)");
    let want = m
        .density_of(meniscus::kernel::Composition::abv(60.0), 25.0)
        .unwrap();
    assert_eq!(num(&h, "s:get(2, 'rho')"), want);
    // The other rows did not change.
    let want = m
        .density_of(meniscus::kernel::Composition::abv(40.0), 20.0)
        .unwrap();
    assert_eq!(num(&h, "s:get(1, 'rho')"), want);
    assert_eq!(text(&h, "s:formulas().rho"), "m:density{abv = abv, t = t}");
    assert_eq!(num(&h, "#s"), 3.0);
    assert_eq!(num(&h, "s:ncols()"), 3.0);
    assert_eq!(text(&h, "table.concat(s:names(), ',')"), "abv,t,rho");
}

#[test]
fn recalculation_follows_dependency_order_and_only_reaches_dependents() {
    let h = host();
    // c depends on b, b on a, a on x; d on y only. Each function formula
    // logs its calls.
    eval(
        &h,
        "log = {}
         s = sheet.new{'x', 'y'}
         for i = 1, 3 do s:add{x = i, y = 10 * i} end
         s:formula('a', function(r) log[#log + 1] = 'a'; return r.x + 1 end, {'x'})
         s:formula('b', function(r) log[#log + 1] = 'b'; return 2 * r.a end, {'a'})
         s:formula('c', 'b + a')
         s:formula('d', function(r) log[#log + 1] = 'd'; return r.y - 1 end, {'y'})
         log = {}",
    );
    eval(&h, "s:set(2, 'x', 7)");
    assert_eq!(text(&h, "table.concat(log, ' ')"), "a b");
    assert_eq!(num(&h, "s:get(2, 'a')"), 8.0);
    assert_eq!(num(&h, "s:get(2, 'b')"), 16.0);
    assert_eq!(num(&h, "s:get(2, 'c')"), 24.0);
    assert_eq!(num(&h, "s:get(1, 'c')"), 6.0);
    eval(&h, "log = {}; s:set(3, 'y', 1)");
    assert_eq!(text(&h, "table.concat(log, ' ')"), "d");
    assert_eq!(num(&h, "s:get(3, 'd')"), 0.0);
    // Redefining a formula recomputes its dependents.
    eval(&h, "s:formula('a', 'x * 100')");
    assert_eq!(num(&h, "s:get(2, 'c')"), 2100.0);
    // A function formula's default dependencies are the data columns.
    eval(
        &h,
        "s:formula('e', function(r) return (r.x or 0) + (r.y or 0) + (r.a or 0) end)",
    );
    assert_eq!(num(&h, "s:get(1, 'e')"), 11.0);
    // Every formula cell equals a full recalculation.
    let before = kernel_sheet(&h, "s");
    eval(&h, "s:recalculate()");
    assert_eq!(kernel_sheet(&h, "s"), before);
}

#[test]
fn cycles_are_refused_naming_the_columns_and_change_nothing() {
    let h = host();
    eval(
        &h,
        "s = sheet.new{'x'}
         s:add{x = 1}:add{x = 2}
         s:formula('a', 'x + 1')
         s:formula('b', 'a * 2')",
    );
    let before = kernel_sheet(&h, "s");
    fails_with(
        &h,
        "s:formula('a', 'b + 1')",
        &["test:1:", "s:formula", "cycle", "a → b → a"],
    );
    fails_with(&h, "s:formula('q', 'q + 1')", &["cycle", "q → q"]);
    fails_with(
        &h,
        "s:formula('x', function(r) return r.b end, {'b'})",
        &["cycle", "x → a → b → x"],
    );
    assert_eq!(kernel_sheet(&h, "s"), before);
    assert_eq!(num(&h, "s:get(2, 'b')"), 6.0);
}

#[test]
fn formula_errors_name_column_row_and_place() {
    let h = host();
    eval(&h, "s = sheet.new{'abv'}; s:add{40}:add{50}");
    fails_with(
        &h,
        "s:formula('rho', 'm:density{abv = abv * 2.2, t = 20}')",
        &["column \"rho\", row 2", "formula \"rho\":1:", "outside"],
    );
    assert_eq!(
        num(&h, "s:ncols()"),
        1.0,
        "the failed formula column is gone"
    );
    eval(&h, "s:formula('rho', 'm:density{abv = abv, t = 20}')");
    fails_with(&h, "s:set(1, 'abv', 120)", &["s:set", "row 1", "outside"]);
    assert_eq!(num(&h, "s:get(1, 'abv')"), 40.0, "the cell kept its value");
    fails_with(
        &h,
        "s:formula('z', 'abv +')",
        &["not one Lua expression", "formula \"z\""],
    );
    fails_with(
        &h,
        "s:formula('z', '1) end; x = (1')",
        &["not one Lua expression"],
    );
    fails_with(
        &h,
        "local k = 2; s:formula('z', 'abv * k')",
        &["'k'", "neither a column", "local variable"],
    );
    fails_with(&h, "s:formula('z', 'abv / 0')", &["row 1", "inf"]);
    fails_with(&h, "s:formula('z', '{abv}')", &["number, a string or nil"]);
    fails_with(&h, "s:set(1, 'rho', 5)", &["formula column"]);
    fails_with(&h, "s:get(3, 'abv')", &["row 3 does not exist", "2 rows"]);
    fails_with(&h, "s:get(0, 'abv')", &["rows count from 1"]);
    fails_with(&h, "s:get(1, 'abx')", &["unknown column", "\"abx\""]);
    fails_with(&h, "s:add{abv = 0/0}", &["column \"abv\"", "finite"]);
    fails_with(&h, "s:add{abv = {}}", &["number, a string or nil"]);
    fails_with(&h, "s:add{abv = 1, 2}", &["either by name", "not both"]);
    fails_with(&h, "s:set_column('abv', {1, nil, 3})", &["hole"]);
    fails_with(
        &h,
        "s:formula('w', function(r) return s:get(1, 'abv') end)",
        &["busy"],
    );
}

#[test]
fn formulas_cannot_assign_globals_or_reach_the_real_environment() {
    let h = host();
    eval(&h, "s = sheet.new{'x'}; s:add{x = 1}; count = 0");
    // An assignment inside an expression never reaches the global.
    eval(&h, "s:formula('y', '(function() count = count + 1 end)()')");
    assert_eq!(num(&h, "count"), 0.0);
    fails_with(
        &h,
        "s:formula('y', '(function() other_global = 1 end)()')",
        &["read-only"],
    );
    fails_with(
        &h,
        "s:formula('y', '(function() string.upper = nil end)()')",
        &["read-only"],
    );
    fails_with(
        &h,
        "s:formula('y', 'load(\"count = 5\")()')",
        &["read-only"],
    );
    fails_with(
        &h,
        "s:formula('y', 'rawset(_G, \"count\", 5)')",
        &["read-only"],
    );
    assert_eq!(num(&h, "count"), 0.0);
    assert_eq!(text(&h, "string.upper('ok')"), "OK");
    // Globals are read live: recalculate picks up a changed global.
    eval(&h, "k = 2; s:formula('y', 'x * k'); k = 3; s:recalculate()");
    assert_eq!(num(&h, "s:get(1, 'y')"), 3.0);
}

#[test]
fn columns_rows_filter_sort_and_display() {
    let h = host();
    eval(
        &h,
        "s = sheet.new{'lot', 'abv'}
         s:add{lot = 'B', abv = 60}:add{lot = 'A', abv = 40}:add{abv = 50}
         s:formula('double', 'abv * 2')",
    );
    assert_eq!(text(&h, "tostring(s:column('abv'))"), "vec{60, 40, 50}");
    assert_eq!(text(&h, "s:column('lot')[2]"), "A");
    assert_eq!(text(&h, "type(s:column('lot')[3])"), "nil");
    assert_eq!(num(&h, "s:row(2).double"), 80.0);
    assert_eq!(text(&h, "type(s:row(3).lot)"), "nil");
    eval(&h, "f = s:filter(function(r) return r.abv >= 50 end)");
    assert_eq!(num(&h, "f:nrows()"), 2.0);
    // The filtered sheet keeps its formulas.
    eval(&h, "f:set(1, 'abv', 1)");
    assert_eq!(num(&h, "f:get(1, 'double')"), 2.0);
    assert_eq!(
        num(&h, "s:get(1, 'abv')"),
        60.0,
        "the original is untouched"
    );
    eval(&h, "s:sort('abv', 'desc')");
    assert_eq!(text(&h, "tostring(s:column('abv'))"), "vec{60, 50, 40}");
    eval(&h, "s:sort('lot')");
    assert_eq!(text(&h, "s:get(1, 'lot')"), "A");
    assert!(h
        .eval("s:get(3, 'lot')", "=t")
        .unwrap()
        .iter()
        .next()
        .unwrap()
        .is_nil());
    fails_with(&h, "s:sort('abv', 'down')", &["\"asc\" or \"desc\""]);
    fails_with(
        &h,
        "s:filter(function(r) error('no') end)",
        &["row 1", "no"],
    );
    let shown = text(&h, "tostring(s)");
    let kernel = kernel_sheet(&h, "s").to_string();
    assert!(shown.starts_with("sheet: 3 rows × 3 columns\n"), "{shown}");
    assert!(shown.contains(kernel.trim_end()), "{shown}");
    // print uses the same text.
    h.take_output();
    eval(&h, "print(s)");
    assert_eq!(h.take_output().trim_end(), shown.trim_end());
}

#[test]
fn set_column_accepts_vectors_and_arrays_and_adds_new_columns() {
    let h = host();
    eval(
        &h,
        "s = sheet.new{}
         s:set_column('abv', range(0, 100, 25))
         s:formula('rho', 'm:density{abv = abv, t = 20}')
         s:set_column('lot', {'a', 'b', '', 'd', 'e'})",
    );
    assert_eq!(num(&h, "s:nrows()"), 5.0);
    assert!(h
        .eval("s:get(3, 'lot')", "=t")
        .unwrap()
        .iter()
        .next()
        .unwrap()
        .is_nil());
    eval(&h, "s:set_column('abv', {10, 20, 30, 40, 50})");
    let want = model()
        .density_of(meniscus::kernel::Composition::abv(30.0), 20.0)
        .unwrap();
    assert_eq!(num(&h, "s:get(3, 'rho')"), want);
    fails_with(&h, "s:set_column('abv', {1, 2})", &["5 values", "got 2"]);
    fails_with(&h, "s:set_column('x', {1, 2})", &["2 values", "5 rows"]);
    fails_with(&h, "s:set_column('abv', 5)", &["vector or an array"]);
}

#[test]
fn grids_long_and_wide_with_gaps() {
    let h = host();
    eval(
        &h,
        "g = sheet.grid{rows = {name = 'abv', values = {0, 50, 100}},
                        cols = {name = 't', values = vec{0, 20}},
                        fn = function(abv, t)
                          local ok, r = pcall(m.hydrometer, m, {abv = abv, t = t})
                          if ok then return r.abv end
                        end, value = 'true_abv'}
         w = sheet.grid{rows = {name = 'abv', values = {0, 50, 100}},
                        cols = {name = 't', values = {0, 20}},
                        fn = function(abv, t) return abv + t end, layout = 'wide'}",
    );
    let m = model();
    let long = kernel_sheet(&h, "g");
    assert_eq!(long.column_names(), vec!["abv", "t", "true_abv"]);
    assert_eq!(long.nrows(), 6);
    let want = m.hydrometer(HydrometerScale::abv(), 50.0, 0.0).unwrap().abv;
    assert_eq!(long.get(2, "true_abv").unwrap(), CellRef::Number(want));
    // 100 % vol read at 0 °C: no mixture gives it, so no value.
    assert!(m.hydrometer(HydrometerScale::abv(), 100.0, 0.0).is_err());
    assert_eq!(long.get(4, "true_abv").unwrap(), CellRef::Empty);
    let wide = kernel_sheet(&h, "w");
    assert_eq!(wide.column_names(), vec!["abv", "t=0", "t=20"]);
    assert_eq!(num(&h, "w:get(3, 't=20')"), 120.0);
    fails_with(
        &h,
        "sheet.grid{rows = {name = 'a', values = {1}}, cols = {name = 'b', values = {2}}, fn = function() error('boom') end}",
        &["a = 1, b = 2", "boom"],
    );
    fails_with(
        &h,
        "sheet.grid{rows = {name = 'a', values = {1}}, cols = {name = 'b', values = {2}}, fn = function() return 'x' end}",
        &["a = 1, b = 2", "must return a number"],
    );
    fails_with(
        &h,
        "sheet.grid{rows = {name = 'a', values = {1}}, cols = {name = 'b', values = {2}}, fn = print, layout = 'tall'}",
        &["\"long\" or \"wide\""],
    );
    fails_with(
        &h,
        "sheet.grid{rows = {name = 'a', values = {1}}, fn = print}",
        &["cols is required"],
    );
    fails_with(
        &h,
        "sheet.grid{rows = {}, cols = {}, fn = print, colour = 1}",
        &["unknown key 'colour'"],
    );
}

#[test]
fn vectorized_grids_give_the_same_table_with_one_call_per_row() {
    let h = host();
    eval(
        &h,
        "calls = 0
         local rows = {name = 'abv', values = {0, 50, 100}}
         local cols = {name = 't', values = {0, 10, 20}}
         local function point(abv, t)
           local ok, r = pcall(m.hydrometer, m, {abv = abv, t = t})
           if ok then return r.abv end
         end
         p = sheet.grid{rows = rows, cols = cols, fn = point, layout = 'wide'}
         v = sheet.grid{rows = rows, cols = cols, layout = 'wide', vectorized = true,
           fn = function(abv, ts)
             calls = calls + 1
             local ok, r = pcall(m.hydrometer, m, {abv = abv, t = ts})
             if ok then return r.abv end
             local out = {}
             for j = 1, #ts do out[j] = point(abv, ts[j]) end
             return out
           end}
         l = sheet.grid{rows = rows, cols = cols, vectorized = true, value = 'x',
           fn = function(abv, ts) return ts * 0 + abv end}",
    );
    assert_eq!(num(&h, "calls"), 3.0);
    let (p, v) = (kernel_sheet(&h, "p"), kernel_sheet(&h, "v"));
    assert_eq!(p, v);
    assert_eq!(
        v.get(2, "t=0").unwrap(),
        CellRef::Empty,
        "100 % vol read at 0 °C"
    );
    assert_eq!(num(&h, "l:get(9, 'x')"), 100.0);
    let grid = |f: &str| {
        format!(
            "sheet.grid{{rows = {{name = 'a', values = {{1, 2}}}}, cols = {{name = 'b', values = {{1, 2, 3}}}}, vectorized = true, fn = {f}}}"
        )
    };
    fails_with(
        &h,
        &grid("function(a, bs) return vec{1, 2} end"),
        &["vector of 2 values for 3"],
    );
    fails_with(
        &h,
        &grid("function(a, bs) return {1, 2, 3, 4} end"),
        &["key number 4"],
    );
    fails_with(
        &h,
        &grid("function(a, bs) return {1, 'x', 3} end"),
        &["[2]", "must return a number"],
    );
    fails_with(
        &h,
        &grid("function(a, bs) return 5 end"),
        &["vector or an array"],
    );
    fails_with(
        &h,
        &grid("function(a, bs) error('boom') end"),
        &["a = 1, b = 1", "whole row", "boom"],
    );
}

// ------------------------------------------------------------ memory

#[test]
fn sheet_size_is_capped_by_the_memory_limit() {
    let h = Host::new(HostOptions {
        memory_limit: 16 * 1024 * 1024,
        standard_plugin_dirs: false,
        ..HostOptions::default()
    })
    .unwrap();
    // 2000 × 2000 × 3 columns × 8 bytes = 96 MB, far over 16 MiB.
    let e = h
        .eval(
            "sheet.grid{rows = {name = 'a', values = range(1, 2000)}, cols = {name = 'b', values = range(1, 2000)}, fn = function(a, b) return a end}",
            "=t",
        )
        .unwrap_err();
    assert!(
        e.message.contains("not enough memory for a sheet"),
        "{}",
        e.message
    );
    assert!(
        e.message.contains("4000000 rows × 3 columns"),
        "{}",
        e.message
    );
    assert!(e.message.contains("--memory-limit"), "{}", e.message);
    // Rows added one by one stop at the limit too, with the same message.
    let e = h
        .eval(
            "local names, row = {}, {}
             for c = 1, 64 do names[c] = 'c' .. c; row[c] = c end
             s = sheet.new(names)
             for i = 1, 1e7 do s:add(row) end",
            "=t",
        )
        .unwrap_err();
    assert!(
        e.message.contains("not enough memory for a sheet"),
        "{}",
        e.message
    );
    // The state is still usable and the memory counted for the sheet is released.
    let before = h.used_memory();
    h.eval("s = nil", "=t").unwrap();
    h.lua().gc_collect().unwrap();
    h.lua().gc_collect().unwrap();
    assert!(h.used_memory() < before, "{} !< {before}", h.used_memory());
    // A cap on cells whatever the memory limit.
    let e = h
        .eval(
            "sheet.grid{rows = {name = 'a', values = range(1, 1e5)}, cols = {name = 'b', values = range(1, 1e4)}, fn = print}",
            "=t",
        )
        .unwrap_err();
    assert!(
        e.message.contains("cells a sheet may hold"),
        "{}",
        e.message
    );
}

// ------------------------------------------------------------ CSV files

#[test]
fn every_malformed_csv_reaches_lua_with_line_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let h = host_in(dir.path());
    let cases: &[(&str, &[u8], &[&str])] = &[
        (
            "ragged.csv",
            b"a,b\n1,2\n3\n",
            &["line 3, column 2", "fields"],
        ),
        (
            "quote.csv",
            b"a,b\n1,\"x\n2,3\n",
            &["line 2, column 2", "never closed"],
        ),
        (
            "utf8.csv",
            b"a,b\n1,x\xff\n",
            &["line 2, column 2", "UTF-8"],
        ),
        (
            "nan.csv",
            b"a,b\n1,2\nNaN,3\n",
            &["line 3, column 1", "NaN"],
        ),
        (
            "inf.csv",
            b"a,b\n1,2\n-inf,3\n",
            &["line 3, column 1", "inf"],
        ),
        (
            "empty.csv",
            b"a,b\n1,2\n,3\n",
            &["line 3, column 1", "empty"],
        ),
        ("dup.csv", b"a,a\n1,2\n", &["line 1, column 2", "twice"]),
        ("blank.csv", b"a, \n1,2\n", &["line 1, column 2", "blank"]),
        ("nothing.csv", b"", &["line 1", "header"]),
        ("blankline.csv", b"a\n1\n\n2\n", &["line 3", "blank line"]),
    ];
    for (name, bytes, fragments) in cases {
        let path = dir.path().join(name);
        std::fs::write(&path, bytes).unwrap();
        let src = format!("sheet.read_csv({:?})", path.display().to_string());
        let e = err(&h, &src);
        assert!(
            e.message.contains("sheet.read_csv"),
            "{name}: {}",
            e.message
        );
        assert!(
            e.message.contains(&path.display().to_string()),
            "{name}: no file in {:?}",
            e.message
        );
        for f in fragments.iter() {
            assert!(e.message.contains(f), "{name}: {:?} lacks {f:?}", e.message);
        }
        assert!(!e.message.contains('\n'), "{name}: {:?}", e.message);
    }
    // Empty numbers may be allowed; a delimiter may be chosen.
    let path = dir.path().join("semi.csv");
    std::fs::write(&path, b"a;b\n1;\n2;3\n").unwrap();
    eval(
        &h,
        &format!(
            "s = sheet.read_csv({:?}, {{delimiter = ';', empty_numbers = true}})",
            path.display().to_string()
        ),
    );
    assert!(h
        .eval("s:get(1, 'b')", "=t")
        .unwrap()
        .iter()
        .next()
        .unwrap()
        .is_nil());
    fails_with(
        &h,
        "sheet.read_csv('x.csv', {delimiter = ';;'})",
        &["one ASCII character"],
    );
}

#[test]
fn files_stay_inside_allowed_paths_and_writes_are_atomic() {
    let dir = tempfile::tempdir().unwrap();
    let other = tempfile::tempdir().unwrap();
    let h = host_in(dir.path());
    eval(&h, "s = sheet.new{'a'}; s:add{1}:add{2}");
    std::fs::write(other.path().join("y.csv"), "a\n1\n").unwrap();
    let outside = other.path().join("x.csv").display().to_string();
    let outside_file = other.path().join("y.csv").display().to_string();
    fails_with(&h, &format!("s:write_csv({outside:?})"), &["outside"]);
    fails_with(
        &h,
        &format!("sheet.read_csv({outside_file:?})"),
        &["outside"],
    );
    assert!(!other.path().join("x.csv").exists());
    // A write into a directory that does not exist fails and leaves nothing.
    let missing = dir.path().join("no/such/dir/x.csv").display().to_string();
    fails_with(&h, &format!("s:write_csv({missing:?})"), &["s:write_csv"]);
    // An existing file is replaced whole.
    let target = dir.path().join("t.csv");
    std::fs::write(&target, "old\n").unwrap();
    eval(
        &h,
        &format!("s:write_csv({:?})", target.display().to_string()),
    );
    assert_eq!(std::fs::read_to_string(&target).unwrap(), "a\n1\n2\n");
    let json = dir.path().join("t.json");
    eval(
        &h,
        &format!(
            "s:write_json({:?}, {{layout = 'columns'}})",
            json.display().to_string()
        ),
    );
    assert_eq!(
        std::fs::read_to_string(&json).unwrap().trim(),
        "{\"a\":[1.0,2.0]}"
    );
    let leftovers: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_name().to_string_lossy().ends_with(".tmp"))
        .collect();
    assert!(leftovers.is_empty(), "temporary files left: {leftovers:?}");
}

/// Text that never reads back as a number (CSV has no types): a leading
/// letter that no float syntax starts with.
fn texts() -> impl Strategy<Value = String> {
    prop_oneof![Just(String::new()), "[xyz][a-z0-9 ,;\"\\n\\r'é€-]{0,12}",]
}

fn columns() -> impl Strategy<Value = (usize, Vec<bool>)> {
    (0usize..12, prop::collection::vec(any::<bool>(), 1..5))
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    /// A sheet built from Lua, written with s:write_csv and read back with
    /// sheet.read_csv, is the same sheet; and it is the sheet the kernel
    /// builds from the same data.
    #[test]
    fn csv_round_trip_through_lua(
        (nrows, kinds) in columns(),
        seed_numbers in prop::collection::vec(
            prop_oneof![any::<f64>().prop_filter("finite", |x| x.is_finite()), -1e6..1e6f64],
            60,
        ),
        seed_texts in prop::collection::vec(texts(), 60),
    ) {
        let dir = tempfile::tempdir().unwrap();
        let h = host_in(dir.path());
        let lua = h.lua();
        let mut expected: Vec<(String, ColumnData)> = Vec::new();
        eval(&h, "s = sheet.new{}");
        for (c, numeric) in kinds.iter().enumerate() {
            let name = format!("c{c}");
            let t = lua.create_table().unwrap();
            let data = if *numeric {
                let xs: Vec<f64> = (0..nrows).map(|r| seed_numbers[(r * 7 + c) % 60]).collect();
                for (i, x) in xs.iter().enumerate() {
                    t.raw_set(i + 1, *x).unwrap();
                }
                ColumnData::Numbers(xs)
            } else {
                let vs: Vec<Cell> = (0..nrows)
                    .map(|r| Cell::from(seed_texts[(r * 5 + c) % 60].clone()))
                    .collect();
                for r in 0..nrows {
                    t.raw_set(r + 1, seed_texts[(r * 5 + c) % 60].as_str()).unwrap();
                }
                ColumnData::Values(vs)
            };
            lua.globals().set("data", t).unwrap();
            eval(&h, &format!("s:set_column('{name}', data)"));
            expected.push((name, data));
        }
        let built = kernel_sheet(&h, "s");
        prop_assert_eq!(&built, &Sheet::from_columns(expected).unwrap());
        let path = dir.path().join("round.csv").display().to_string();
        eval(&h, &format!("s:write_csv({path:?}); back = sheet.read_csv({path:?})"));
        let back = kernel_sheet(&h, "back");
        if nrows == 0 && kinds.iter().any(|n| !n) {
            // No rows: nothing tells a text column from a numeric one.
            prop_assert_eq!(back.column_names(), built.column_names());
        } else {
            prop_assert_eq!(&back, &built, "csv: {:?}", std::fs::read_to_string(&path));
        }
        // The kernel reads the same file to the same sheet.
        let direct = Sheet::read_csv(std::fs::File::open(&path).unwrap(), &CsvOptions::default()).unwrap();
        prop_assert_eq!(direct, back);
    }
}

// ------------------------------------------------------------ help and completion

#[test]
fn help_and_completion_cover_the_sheet_api() {
    let h = host();
    for name in [
        "sheet",
        "sheet.new",
        "sheet.read_csv",
        "sheet.grid",
        "sheet:add",
        "sheet:set",
        "sheet:get",
        "sheet:set_column",
        "sheet:formula",
        "sheet:formulas",
        "sheet:recalculate",
        "sheet:column",
        "sheet:row",
        "sheet:nrows",
        "sheet:ncols",
        "sheet:names",
        "sheet:filter",
        "sheet:sort",
        "sheet:write_csv",
        "sheet:write_json",
        "files.mkdir",
    ] {
        let t = h.help_text(name);
        assert!(!t.starts_with("no help"), "{name}: {t}");
    }
    assert!(h.help_text("sheet.grid").contains("official"));
    eval(&h, "s = sheet.new{'a'}");
    h.take_output();
    eval(&h, "help(s)");
    assert!(h.take_output().starts_with("sheet (namespace and type)"));
    eval(&h, "help(s.formula)");
    assert!(h.take_output().starts_with("s:formula(name"));
    let (_, c) = h.completions("s:for", 5);
    assert_eq!(c, vec!["formula", "formulas"]);
    let (_, c) = h.completions("sheet.gr", 8);
    assert_eq!(c, vec!["grid"]);
}

// ------------------------------------------------------------ workflow scripts

#[cfg(feature = "cli")]
mod scripts {
    use super::*;
    use std::path::PathBuf;
    use std::process::{Command, Stdio};

    const BIN: &str = env!("CARGO_BIN_EXE_meniscus");

    fn script(name: &str) -> PathBuf {
        Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("scripts/tables")
            .join(name)
    }

    /// Runs a script in a fresh directory; returns the directory and stdout.
    fn run(name: &str, args: &[&str]) -> (tempfile::TempDir, String) {
        let dir = tempfile::tempdir().unwrap();
        let o = Command::new(BIN)
            .current_dir(dir.path())
            .env("MENISCUS_HISTORY", "")
            .env("XDG_CONFIG_HOME", dir.path())
            .stdin(Stdio::null())
            .arg("run")
            .arg(script(name))
            .args(args)
            .output()
            .unwrap();
        let out = String::from_utf8_lossy(&o.stdout).into_owned();
        assert!(
            o.status.success(),
            "{name}: {}\n{out}",
            String::from_utf8_lossy(&o.stderr)
        );
        assert!(out.contains("Cautions"), "{name}: no cautions in {out}");
        assert!(out.contains("authority prescribes"), "{name}");
        (dir, out)
    }

    fn read(dir: &Path, file: &str) -> Sheet {
        // Tables leave a cell empty where there is no value.
        let f = std::fs::File::open(dir.join("out").join(file)).unwrap();
        let o = CsvOptions {
            allow_empty_numbers: true,
            ..CsvOptions::default()
        };
        Sheet::read_csv(f, &o).unwrap()
    }

    fn number(s: &Sheet, row: usize, col: &str) -> f64 {
        s.get(row, col).unwrap().as_number().unwrap()
    }

    #[test]
    fn density_table_matches_the_kernel() {
        let (dir, out) = run("density_abv.lua", &["2.5", "5"]);
        assert!(out.contains("out/density_from_abv_20C.csv"), "{out}");
        let m = model();
        let s = read(dir.path(), "density_from_abv_20C.csv");
        assert_eq!(s.nrows(), 41);
        for row in [0, 7, 16, 29, 40] {
            let abv = number(&s, row, "abv");
            assert_eq!(abv, row as f64 * 2.5);
            let c = meniscus::kernel::Composition::abv(abv);
            assert_eq!(number(&s, row, "density"), m.density_of(c, 20.0).unwrap());
            assert_eq!(number(&s, row, "abm"), m.convert(c).unwrap().abm);
        }
        let r = read(dir.path(), "abv_from_density_20C.csv");
        assert!(r.nrows() > 30);
        for row in [0, 10, r.nrows() - 1] {
            let rho = number(&r, row, "density");
            let st = m.strength_from_density(rho, 20.0).unwrap();
            assert_eq!(number(&r, row, "abv"), st.abv);
            assert_eq!(number(&r, row, "abm"), st.abm);
        }
        // The ends bracket pure ethanol and water.
        assert!(number(&r, 0, "density") >= m.density(1.0, 20.0).unwrap());
        assert!(number(&r, r.nrows() - 1, "density") <= m.density(0.0, 20.0).unwrap());
    }

    #[test]
    fn hydrometer_table_matches_the_kernel() {
        let (dir, out) = run("hydrometer_correction.lua", &["5", "10"]);
        assert!(out.contains("21 readings × 5 temperatures"), "{out}");
        let m = model();
        let s = read(dir.path(), "hydrometer_correction.csv");
        assert_eq!(
            s.column_names(),
            vec!["reading", "t=0", "t=10", "t=20", "t=30", "t=40"]
        );
        let mut gaps = 0;
        for row in 0..s.nrows() {
            let reading = number(&s, row, "reading");
            for t in [0.0, 10.0, 20.0, 30.0, 40.0] {
                let cell = s.get(row, &format!("t={t}")).unwrap();
                match m.hydrometer(HydrometerScale::abv(), reading, t) {
                    Ok(st) => assert_eq!(cell, CellRef::Number(st.abv), "{reading} at {t}"),
                    Err(_) => {
                        assert_eq!(cell, CellRef::Empty, "{reading} at {t}");
                        gaps += 1;
                    }
                }
            }
        }
        assert!(gaps > 0, "cold readings near 100 % vol have no value");
        assert!(
            out.contains(&format!("{gaps} points have no value")),
            "{out}"
        );
        // Long layout: the same values, one row per pair.
        let (dir, _) = run("hydrometer_correction.lua", &["25", "20", "long"]);
        let l = read(dir.path(), "hydrometer_correction.csv");
        assert_eq!(l.column_names(), vec!["reading", "t", "abv"]);
        assert_eq!(l.nrows(), 5 * 3);
        let (reading, t) = (number(&l, 7, "reading"), number(&l, 7, "t"));
        assert_eq!((reading, t), (50.0, 20.0));
        let want = m
            .hydrometer(HydrometerScale::abv(), 50.0, 20.0)
            .unwrap()
            .abv;
        assert_eq!(number(&l, 7, "abv"), want);
    }

    #[test]
    fn contraction_tables_match_the_kernel() {
        let (dir, out) = run("contraction.lua", &[]);
        let m = model();
        let g = read(dir.path(), "contraction_grid.csv");
        assert_eq!(g.nrows(), 11);
        assert_eq!(g.ncols(), 12);
        for (row, col) in [(5, "water_l=50"), (3, "water_l=90"), (10, "water_l=10")] {
            let e = number(&g, row, "ethanol_l");
            let w: f64 = col.trim_start_matches("water_l=").parse().unwrap();
            let want = m.mix_volumes(e, w, 20.0).unwrap().contraction;
            assert_eq!(number(&g, row, col), want, "{e} + {w}");
        }
        assert_eq!(g.get(0, "water_l=0").unwrap(), CellRef::Empty);
        let s = read(dir.path(), "contraction_100L.csv");
        assert_eq!(s.nrows(), 101);
        let mut best = (0.0, 0);
        for row in 0..s.nrows() {
            let e = number(&s, row, "ethanol_l");
            let mix = m.mix_volumes(e, 100.0 - e, 20.0);
            match mix {
                Ok(mix) => {
                    assert_eq!(number(&s, row, "volume_l"), mix.volume);
                    let c = number(&s, row, "contraction_l");
                    assert!((c - mix.contraction).abs() < 1e-9, "{e}: {c}");
                    if c > best.0 {
                        best = (c, row);
                    }
                }
                Err(e) => panic!("{e}"),
            }
        }
        let e = number(&s, best.1, "ethanol_l");
        assert!(
            out.contains(&format!(
                "largest loss: {:.2} L per 100 L, mixing {e} L ethanol",
                best.0
            )),
            "{out}"
        );
        // Another temperature is honoured.
        let (dir, _) = run("contraction.lua", &["10"]);
        let s = read(dir.path(), "contraction_100L.csv");
        let want = m.mix_volumes(40.0, 60.0, 10.0).unwrap().volume;
        assert_eq!(number(&s, 40, "volume_l"), want);
    }
}
