//! Every numeric config key driven with extreme values (issue 20): zero, tiny, subnormal,
//! negative, huge and the integer limits, through `icefold check` for every key of every
//! section, and through a short `run` / `ensemble` / `sweep` for the duration and step keys.
//! Each must end with exit 0 (accepted), 2 (refused, naming the key) or 3 (numerical failure),
//! never a panic (exit 101) or any other status. A few seconds in all: the runs are capped by
//! `time.max_steps` and short `time.years`.

mod common_cli;

use common_cli::{config, tempdir, BIN};
use std::collections::BTreeMap;
use std::process::Command;

/// Configs that together hold every section (hemisphere and globe, every insolation, OLR,
/// transport, forcing, sweep, branches, regimes and ensemble section of the shipped examples).
const CONFIGS: &[&str] = &[
    "classic-step-albedo.toml",
    "smooth-albedo.toml",
    "seasonal-globe.toml",
    "globe-with-land.toml",
    "gray-body.toml",
    "emission-level-co2.toml",
    "north1975-exact.toml",
    "forcing-orvane.toml",
    "sweep-solar.toml",
    "branches-co2.toml",
    "regimes-classic.toml",
    "ensemble-lhs.toml",
];

/// Extreme values: zero, tiny, subnormal, negative, huge, non-finite spellings TOML accepts,
/// and integers at the edge of i64.
const EXTREMES: &[&str] = &[
    "0",
    "-0.0",
    "1e-300",
    "5e-324",
    "-1",
    "-1e300",
    "1e300",
    "inf",
    "nan",
    "9223372036854775807",
    "-9223372036854775808",
];

/// The dotted paths of every numeric leaf reachable through tables (what `--set` can reach).
fn numeric_keys(v: &toml::Value, prefix: &str, out: &mut Vec<String>) {
    match v {
        toml::Value::Table(t) => {
            for (k, child) in t {
                let key = if prefix.is_empty() {
                    k.clone()
                } else {
                    format!("{prefix}.{k}")
                };
                numeric_keys(child, &key, out);
            }
        }
        toml::Value::Float(_) | toml::Value::Integer(_) => out.push(prefix.to_string()),
        _ => {}
    }
}

/// Every numeric key with one config that has it.
fn keys_with_config() -> BTreeMap<String, String> {
    let mut map = BTreeMap::new();
    for name in CONFIGS {
        let loaded = icefold::config::load(std::path::Path::new(&config(name)), &[]).unwrap();
        let mut keys = Vec::new();
        numeric_keys(&loaded.resolved, "", &mut keys);
        for k in keys {
            map.entry(k).or_insert_with(|| name.to_string());
        }
    }
    map
}

/// Run icefold with `args` in `dir`; panics with the command line unless it ends with exit 0,
/// 2 or 3, and unless a refusal is one line naming the key.
fn assert_orderly(dir: &std::path::Path, args: &[String], key: &str) -> i32 {
    let out = Command::new(BIN).args(args).current_dir(dir).output().unwrap();
    let code = out.status.code();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        matches!(code, Some(0 | 2 | 3)),
        "icefold {}: exit {code:?}\n{stderr}",
        args.join(" ")
    );
    assert!(
        !stderr.contains("panicked"),
        "icefold {}: {stderr}",
        args.join(" ")
    );
    if code == Some(2) {
        let leaf = key.rsplit('.').next().unwrap();
        assert!(
            stderr.contains(leaf),
            "icefold {}: the refusal does not name the key: {stderr}",
            args.join(" ")
        );
    }
    code.unwrap()
}

/// Spread `jobs` over two threads (the machine's usual core count for tests).
fn in_parallel(
    jobs: Vec<Vec<String>>,
    dir: &std::path::Path,
    key_of: impl Fn(&[String]) -> String + Sync,
) -> usize {
    let chunks: Vec<&[Vec<String>]> = jobs.chunks(jobs.len().div_ceil(2).max(1)).collect();
    std::thread::scope(|s| {
        let handles: Vec<_> = chunks
            .into_iter()
            .map(|chunk| {
                let key_of = &key_of;
                s.spawn(move || {
                    for args in chunk {
                        assert_orderly(dir, args, &key_of(args));
                    }
                    chunk.len()
                })
            })
            .collect();
        handles.into_iter().map(|h| h.join().unwrap()).sum()
    })
}

/// The key of a `--set KEY=VALUE` argument list (the first --set).
fn set_key(args: &[String]) -> String {
    let i = args.iter().position(|a| a == "--set").unwrap();
    args[i + 1].split('=').next().unwrap().to_string()
}

#[test]
fn every_numeric_key_with_extreme_values_is_accepted_or_refused_by_check_never_a_panic() {
    let dir = tempdir("numeric-keys-check");
    let keys = keys_with_config();
    // Every section of the README's key table is represented (a guard against the list of
    // configs shrinking).
    for must in [
        "grid.bands",
        "time.years",
        "time.max_step_years",
        "sweep.settle_max_years",
        "branches.max_step",
        "regimes.rows",
        "ensemble.members",
        "forcing.solar_scale",
        "insolation.eccentricity",
    ] {
        assert!(keys.contains_key(must), "no config has {must}");
    }
    let mut jobs = Vec::new();
    for (key, cfg) in &keys {
        for v in EXTREMES {
            jobs.push(vec![
                "check".to_string(),
                config(cfg),
                "--set".to_string(),
                format!("{key}={v}"),
            ]);
        }
    }
    let n = in_parallel(jobs, &dir, set_key);
    assert!(n >= 30 * EXTREMES.len(), "only {n} cases");
}

#[test]
fn duration_and_step_keys_with_extreme_values_run_or_are_refused_never_a_panic() {
    let dir = tempdir("numeric-keys-run");
    let time_keys = [
        "time.years",
        "time.max_step_years",
        "time.output_every_years",
        "time.tolerance",
        "time.max_steps",
        "time.step_days",
    ];
    let values = ["0", "1e-300", "5e-324", "1e-12", "1e-10", "1e-6", "-1", "1e300"];
    let mut jobs = Vec::new();
    let mut n = 0;
    for key in time_keys {
        for v in values {
            n += 1;
            let out = format!("out{n}.nc");
            // Short runs: 0.01 years and at most 2000 steps unless the key under test is one
            // of those (then exhaustion of the step budget ends the run with exit 3).
            let mut base = vec![format!("{key}={v}")];
            if key != "time.years" {
                base.push("time.years=0.01".into());
            }
            if key != "time.max_steps" {
                base.push("time.max_steps=2000".into());
            }
            for method in ["implicit", "dopri5"] {
                if key == "time.step_days" && method != "implicit" {
                    continue;
                }
                let mut args = vec!["run".to_string(), config("classic-step-albedo.toml")];
                for s in &base {
                    args.extend(["--set".to_string(), s.clone()]);
                }
                args.extend([
                    "--set".into(),
                    format!("time.method={method}"),
                    "-o".into(),
                    format!("{method}-{out}"),
                    "--overwrite".into(),
                ]);
                jobs.push(args);
            }
            // The ensemble integrates every member with the same time keys.
            let mut args = vec!["ensemble".to_string(), config("ensemble-lhs.toml")];
            for s in base.iter().chain(&["ensemble.members=2".to_string()]) {
                args.extend(["--set".to_string(), s.clone()]);
            }
            args.extend(["-o".into(), format!("ens-{out}"), "--overwrite".into()]);
            jobs.push(args);
        }
    }
    // The sweep's settling time limit feeds the same adaptive stepper.
    for v in values {
        n += 1;
        jobs.push(vec![
            "sweep".into(),
            config("sweep-solar.toml"),
            "--set".into(),
            format!("sweep.settle_max_years={v}"),
            "--set".into(),
            "sweep.steps=3".into(),
            "-o".into(),
            format!("sweep{n}.nc"),
            "--overwrite".into(),
        ]);
    }
    let count = in_parallel(jobs, &dir, set_key);
    assert!(count > 100, "only {count} cases");
}

/// The three panics of issue 20, each now a refusal naming the key and its allowed range.
#[test]
fn tiny_durations_and_step_limits_are_refused_with_their_range() {
    let dir = tempdir("numeric-keys-tiny");
    for (cmd, cfg, set) in [
        ("run", "classic-step-albedo.toml", "time.years=1e-10"),
        ("run", "classic-step-albedo.toml", "time.max_step_years=1e-12"),
        ("ensemble", "ensemble-lhs.toml", "time.max_step_years=1e-10"),
    ] {
        let out = Command::new(BIN)
            .args([cmd, &config(cfg), "--set", set, "-o", "x.nc"])
            .current_dir(&dir)
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{cmd} --set {set}: {stderr}");
        let key = set.split('=').next().unwrap();
        assert!(
            stderr.contains(&format!("`{key}`"))
                && (stderr.contains("at least 0.000001") || stderr.contains("from 0.000001")),
            "{cmd} --set {set}: {stderr}"
        );
        assert!(!dir.join("x.nc").exists());
    }
}
