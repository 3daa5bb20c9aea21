//! `icefold inspect FILE --json` on every file kind: the JSON parses, its facts are those the
//! file holds (read back with the library's reader) and those the text summary prints.

mod common_cli;

use common_cli::*;
use icefold::output::NcReader;
use serde_json::Value;
use std::path::Path;

/// The JSON and text summaries of `file` in `dir`.
fn inspect(dir: &Path, file: &str) -> (Value, String) {
    let json = icefold(dir, &["inspect", file, "--json"]);
    ok(&json);
    let text = icefold(dir, &["inspect", file]);
    ok(&text);
    let v: Value = serde_json::from_slice(&json.stdout).expect("inspect --json prints JSON");
    (v, String::from_utf8(text.stdout).unwrap())
}

/// The text line starting with `label` (without it).
fn line<'a>(text: &'a str, label: &str) -> &'a str {
    text.lines()
        .find_map(|l| l.strip_prefix(label))
        .unwrap_or_else(|| panic!("no `{label}` line in\n{text}"))
        .trim()
}

/// The facts every kind shares, against the file and the text.
fn common_facts(dir: &Path, file: &str, kind: &str) -> (Value, String, NcReader) {
    let (v, text) = inspect(dir, file);
    let r = NcReader::open(&dir.join(file)).unwrap();
    assert_eq!(v["kind"], kind);
    assert_eq!(r.attr_str("icefold_kind").unwrap().as_deref(), Some(kind));
    assert_eq!(line(&text, "kind:"), kind);
    let complete = r.attr_i64("complete").unwrap();
    assert_eq!(v["complete"].as_bool(), complete.map(|c| c == 1));
    match v["complete"].as_bool() {
        Some(true) => assert_eq!(line(&text, "complete:"), "yes"),
        _ => assert_eq!(
            line(&text, "complete:"),
            format!("NO ({})", v["how_far"].as_str().unwrap())
        ),
    }
    assert_eq!(
        v["command_line"].as_str(),
        r.attr_str("command_line").unwrap().as_deref()
    );
    let dims = v["dimensions"].as_array().unwrap();
    let names: Vec<String> = r.dim_names().unwrap();
    assert_eq!(dims.len(), names.len());
    for (d, name) in dims.iter().zip(&names) {
        assert_eq!(d["name"], name.as_str());
        assert_eq!(d["length"].as_u64(), Some(r.dim_len(name).unwrap() as u64));
        assert_eq!(d["unlimited"].as_bool(), Some(r.dim_unlimited(name).unwrap()));
    }
    let vars: Vec<&str> = v["variables"]
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_str().unwrap())
        .collect();
    assert_eq!(vars, r.var_names().unwrap());
    assert_eq!(line(&text, "variables:"), vars.join(", "));
    let cfg = &v["config"];
    assert_eq!(
        line(&text, "config:").split(' ').next().unwrap(),
        format!("\"{}\"", cfg["domain"].as_str().unwrap())
    );
    (v, text, r)
}

/// The first and last values of `name` in the file.
fn ends(r: &NcReader, name: &str) -> (f64, f64) {
    let v = r.read_f64(name).unwrap();
    (v[0], v[v.len() - 1])
}

#[test]
fn inspect_json_holds_the_file_facts_for_every_kind() {
    let dir = tempdir("inspect-json");
    let make = |args: &[&str]| ok(&icefold(&dir, args));
    make(&[
        "run",
        &config("classic-step-albedo.toml"),
        "-o",
        "run.nc",
        "--set",
        "time.years=10",
    ]);
    make(&["equilibrium", &config("classic-step-albedo.toml"), "-o", "eq.nc"]);
    make(&[
        "sweep",
        &config("sweep-solar.toml"),
        "-o",
        "sweep.nc",
        "--set",
        "sweep.steps=30",
    ]);
    make(&["branches", &config("branches-co2.toml"), "-o", "br.nc"]);
    make(&[
        "regimes",
        &config("regimes-classic.toml"),
        "-o",
        "reg.nc",
        "--set",
        "regimes.rows=4",
    ]);
    make(&[
        "ensemble",
        &config("ensemble-lhs.toml"),
        "-o",
        "ens.nc",
        "--set",
        "ensemble.members=4",
    ]);

    // Run: the time span and series ends are the file's values (JSON numbers round-trip f64).
    let (v, text, r) = common_facts(&dir, "run.nc", "run");
    let t = r.read_f64("time").unwrap();
    assert_eq!(v["time"]["records"].as_u64(), Some(t.len() as u64));
    assert_eq!(v["time"]["last"].as_f64(), Some(t[t.len() - 1]));
    let series = v["series"].as_array().unwrap();
    assert!(!series.is_empty());
    for s in series {
        let name = s["name"].as_str().unwrap();
        let (a, b) = ends(&r, name);
        assert_eq!(
            (s["first"].as_f64(), s["last"].as_f64()),
            (Some(a), Some(b)),
            "{name}"
        );
        assert_eq!(
            line(&text, &format!("{name}:")),
            format!("{a:.4} -> {b:.4} {}", s["units"].as_str().unwrap())
        );
    }
    assert_eq!(v["details"], Value::Null);

    // Equilibrium: the state is the file's.
    let (v, _, r) = common_facts(&dir, "eq.nc", "equilibrium");
    let q = &v["details"]["equilibrium"];
    assert_eq!(
        q["global_mean"].as_f64(),
        Some(ends(&r, "global_mean_temperature").0)
    );
    assert_eq!(
        q["stability"].as_str(),
        r.attr_str("stability").unwrap().as_deref()
    );

    // Sweep: control and tipping points.
    let (v, text, r) = common_facts(&dir, "sweep.nc", "sweep");
    let w = &v["details"]["sweep"];
    assert_eq!(
        w["control"]["key"].as_str(),
        r.attr_str("control_key").unwrap().as_deref()
    );
    let tc = r.read_f64("tipping_control").unwrap();
    let tips = w["tipping"].as_array().unwrap();
    assert_eq!(tips.len(), tc.len());
    for (t, c) in tips.iter().zip(&tc) {
        assert_eq!(t["control"].as_f64(), c.is_finite().then_some(*c));
    }
    assert!(line(&text, "control:").starts_with(w["control"]["key"].as_str().unwrap()));

    // Branches: folds and branch count.
    let (v, text, r) = common_facts(&dir, "br.nc", "branches");
    let b = &v["details"]["branches"];
    let fc = r.read_f64("fold_control").unwrap();
    let folds: Vec<f64> = b["folds"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["control"].as_f64().unwrap())
        .collect();
    assert_eq!(folds, fc);
    assert!(!folds.is_empty());
    assert_eq!(
        b["branches"].as_u64(),
        Some(r.dim_len("branches").unwrap() as u64)
    );
    assert_eq!(line(&text, "branches:"), b["branches"].to_string());

    // Regimes: both axes, the fold-line vertices, the stable-count histogram covers every cell.
    let (v, _, r) = common_facts(&dir, "reg.nc", "regimes");
    let m = &v["details"]["regimes"];
    assert_eq!(
        m["axes"][0]["values"].as_u64(),
        Some(r.dim_len("p1").unwrap() as u64)
    );
    assert_eq!(m["axes"][1]["values"].as_u64(), Some(4));
    assert_eq!(
        m["axes"][1]["key"].as_str(),
        r.attr_str("row_control_key").unwrap().as_deref()
    );
    assert_eq!(
        m["fold_vertices"].as_u64(),
        Some(r.read_f64("fold_line").unwrap().len() as u64)
    );
    let cells: u64 = m["stable_counts"]
        .as_array()
        .unwrap()
        .iter()
        .map(|p| p[1].as_u64().unwrap())
        .sum();
    assert_eq!(cells as usize, r.read_f64("stable_count").unwrap().len());

    // Ensemble: members, sampled keys and the spread of the final global means.
    let (v, text, r) = common_facts(&dir, "ens.nc", "ensemble");
    let e = &v["details"]["ensemble"];
    assert_eq!(e["members"].as_u64(), Some(4));
    let keys: Vec<&str> = e["sampled"]
        .as_array()
        .unwrap()
        .iter()
        .map(|k| k["key"].as_str().unwrap())
        .collect();
    assert_eq!(keys.join(","), r.attr_str("sampled_keys").unwrap().unwrap());
    let nt = r.dim_len("time").unwrap();
    let mut finals: Vec<f64> = r
        .read_f64("global_mean_temperature")
        .unwrap()
        .chunks(nt)
        .map(|c| c[nt - 1])
        .collect();
    finals.sort_by(f64::total_cmp);
    let g = &e["final_values"][0];
    assert_eq!(g["name"], "global_mean_temperature");
    assert_eq!(
        (g["min"].as_f64(), g["max"].as_f64()),
        (Some(finals[0]), Some(finals[3]))
    );
    assert!(line(&text, "members:").starts_with("4 (from 0 of 4)"));
}

#[test]
fn inspect_json_of_an_incomplete_file_says_how_far_it_got() {
    let dir = tempdir("inspect-json-partial");
    let out = std::process::Command::new(BIN)
        .args([
            "sweep",
            &config("sweep-solar.toml"),
            "-o",
            "s.nc",
            "--checkpoint-every-steps",
            "5",
        ])
        .current_dir(&dir)
        .env(icefold::interrupt::FAULT_ENV, "1")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(130));
    let (v, _, r) = common_facts(&dir, "s.nc", "sweep");
    assert_eq!(v["complete"], false);
    assert_eq!(v["interrupted_by"], "SIGINT");
    let done = r.attr_i64("steps_done").unwrap().unwrap();
    assert!(v["how_far"]
        .as_str()
        .unwrap()
        .starts_with(&format!("stopped after sweep step {done}, control ")));
}
