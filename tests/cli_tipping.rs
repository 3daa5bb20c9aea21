//! `icefold equilibrium`, `sweep` and `branches` through the binary (issue 3): the files carry
//! the fixed names of DESIGN section 4 (read back with the crate's reader), existing files are
//! kept without `--overwrite`, and bad input exits 2 naming the key with no file left behind.

use icefold::output::NcReader;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

const BIN: &str = env!("CARGO_BIN_EXE_icefold");

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("icefold-cli-tipping-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn config(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("configs").join(name)
}

fn icefold(dir: &Path, args: &[&str]) -> Output {
    Command::new(BIN).args(args).current_dir(dir).output().unwrap()
}

fn ok(out: &Output) {
    assert!(
        out.status.success(),
        "exit {:?}: {}",
        out.status.code(),
        String::from_utf8_lossy(&out.stderr)
    );
}

fn has(r: &NcReader, names: &[&str]) {
    let vars = r.var_names().unwrap();
    for n in names {
        assert!(vars.iter().any(|v| v == n), "missing variable {n} in {vars:?}");
    }
}

#[test]
fn equilibrium_file_has_the_state_budget_and_spectrum() {
    let dir = tempdir("eq");
    let cfg = config("classic-step-albedo.toml");
    let out = icefold(&dir, &["equilibrium", cfg.to_str().unwrap(), "-o", "eq.nc"]);
    ok(&out);
    let r = NcReader::open(&dir.join("eq.nc")).unwrap();
    has(
        &r,
        &[
            "lat",
            "surface_temperature",
            "absorbed_sunlight",
            "outgoing_longwave",
            "transport_convergence",
            "net_heating",
            "global_mean_temperature",
            "ice_edge_latitude_north",
            "max_abs_net_heating",
            "eigenvalue",
            "efolding_time",
        ],
    );
    assert_eq!(r.var_dims("surface_temperature").unwrap(), ["lat"]);
    assert_eq!(r.var_dims("eigenvalue").unwrap(), ["mode"]);
    assert_eq!(r.dim_len("mode").unwrap(), 90);
    let ev = r.read_f64("eigenvalue").unwrap();
    let lead = r.attr_f64("leading_eigenvalue").unwrap().unwrap();
    assert_eq!(ev[0], lead);
    assert!(ev.windows(2).all(|w| w[0] >= w[1]), "largest first");
    assert_eq!(r.attr_str("stability").unwrap().as_deref(), Some("stable"));
    assert_eq!(
        r.attr_str("spectrum_method").unwrap().as_deref(),
        Some("symmetric")
    );
    assert_eq!(
        r.attr_str("icefold_kind").unwrap().as_deref(),
        Some("equilibrium")
    );
    // The residual is the Newton tolerance's order (1e-9 W m-2), and the budget closes.
    let resid = r.read_f64("max_abs_net_heating").unwrap()[0];
    assert!(resid < 1e-8, "{resid}");
    let parts: Vec<Vec<f64>> = [
        "absorbed_sunlight",
        "outgoing_longwave",
        "transport_convergence",
        "net_heating",
    ]
    .iter()
    .map(|n| r.read_f64(n).unwrap())
    .collect();
    for (((a, o), t), g) in parts[0].iter().zip(&parts[1]).zip(&parts[2]).zip(&parts[3]) {
        assert!((a - o + t - g).abs() < 1e-9);
    }
    let efold = r.read_f64("efolding_time").unwrap();
    assert!((efold[0] * lead.abs() - 1.0).abs() < 1e-12);
    // With Newton limited to one iteration it fails from the start; time stepping takes over
    // and Newton finishes on the same equilibrium (to the Newton tolerance over |G_T|, ~1e-10 K).
    let out = icefold(
        &dir,
        &[
            "equilibrium",
            cfg.to_str().unwrap(),
            "-o",
            "fb.nc",
            "--set",
            "equilibrium.max_iterations=1",
        ],
    );
    ok(&out);
    let fb = NcReader::open(&dir.join("fb.nc")).unwrap();
    assert_eq!(
        fb.attr_str("solver").unwrap().as_deref(),
        Some("time stepping, then newton")
    );
    assert!(fb.attr_f64("settle_years").unwrap().unwrap() > 1.0);
    let (a, b) = (
        r.read_f64("surface_temperature").unwrap(),
        fb.read_f64("surface_temperature").unwrap(),
    );
    let diff = a.iter().zip(&b).map(|(x, y)| (x - y).abs()).fold(0.0, f64::max);
    assert!(diff < 1e-6, "{diff}");
    // From a snowball start the same config settles on the (stable) snowball.
    let out = icefold(
        &dir,
        &[
            "equilibrium",
            cfg.to_str().unwrap(),
            "-o",
            "snow.nc",
            "--start",
            "snowball",
        ],
    );
    ok(&out);
    let r = NcReader::open(&dir.join("snow.nc")).unwrap();
    assert_eq!(r.read_f64("ice_edge_latitude_north").unwrap(), [0.0]);
    assert_eq!(r.attr_str("start").unwrap().as_deref(), Some("snowball"));
    assert!(r.attr_f64("leading_eigenvalue").unwrap().unwrap() < 0.0);
}

#[test]
fn sweep_file_has_the_fixed_names_and_the_hysteresis() {
    let dir = tempdir("sweep");
    let cfg = config("sweep-solar.toml");
    let out = icefold(&dir, &["sweep", cfg.to_str().unwrap(), "-o", "sweep.nc"]);
    ok(&out);
    let r = NcReader::open(&dir.join("sweep.nc")).unwrap();
    has(
        &r,
        &[
            "control",
            "direction",
            "global_mean_temperature",
            "ice_edge_latitude_north",
            "tipping_control",
            "tipping_direction",
            "surface_temperature",
            "settle_years",
            "settled",
        ],
    );
    for v in [
        "control",
        "direction",
        "global_mean_temperature",
        "ice_edge_latitude_north",
    ] {
        assert_eq!(r.var_dims(v).unwrap(), ["step"]);
    }
    for v in ["tipping_control", "tipping_direction"] {
        assert_eq!(r.var_dims(v).unwrap(), ["tipping"]);
    }
    assert_eq!(r.var_dims("surface_temperature").unwrap(), ["step", "lat"]);
    assert_eq!(
        r.attr_str("control_key").unwrap().as_deref(),
        Some("insolation.solar_constant")
    );
    assert_eq!(r.dim_len("step").unwrap(), 242);
    let dir_v = r.read_f64("direction").unwrap();
    assert!(dir_v[..121].iter().all(|d| *d == 1.0) && dir_v[121..].iter().all(|d| *d == -1.0));
    let tips = r.read_f64("tipping_control").unwrap();
    assert_eq!(tips.len(), 3, "{tips:?}");
    let width = r.attr_f64("hysteresis_width").unwrap().unwrap();
    let lo = tips.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = tips.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    assert!((width - (hi - lo)).abs() < 1e-9 * hi, "{width} vs {}", hi - lo);
}

#[test]
fn branches_file_has_the_fixed_names() {
    let dir = tempdir("branches");
    let cfg = config("branches-solar.toml");
    let out = icefold(&dir, &["branches", cfg.to_str().unwrap(), "-o", "br.nc"]);
    ok(&out);
    let r = NcReader::open(&dir.join("br.nc")).unwrap();
    has(
        &r,
        &[
            "control",
            "global_mean_temperature",
            "ice_edge_latitude_north",
            "stable",
            "leading_eigenvalue",
            "branch",
            "fold_control",
            "fold_ice_edge_latitude_north",
            "surface_temperature",
        ],
    );
    for v in [
        "control",
        "global_mean_temperature",
        "ice_edge_latitude_north",
        "stable",
        "leading_eigenvalue",
        "branch",
    ] {
        assert_eq!(r.var_dims(v).unwrap(), ["point"]);
    }
    for v in ["fold_control", "fold_ice_edge_latitude_north"] {
        assert_eq!(r.var_dims(v).unwrap(), ["fold"]);
    }
    assert_eq!(
        r.attr_str("control_key").unwrap().as_deref(),
        Some("insolation.solar_constant")
    );
    let stable = r.read_f64("stable").unwrap();
    let lead = r.read_f64("leading_eigenvalue").unwrap();
    assert!(stable.iter().zip(&lead).all(|(s, l)| (*s == 1.0) == (*l < 0.0)));
    assert!(
        r.dim_len("point").unwrap() >= 300,
        "the example curve has 300+ points"
    );
    assert_eq!(r.dim_len("fold").unwrap(), 4);
    let control = r.read_f64("control").unwrap();
    assert!(control.iter().all(|c| (1100.0..=1800.0).contains(c)));
}

#[test]
fn existing_files_are_kept_without_overwrite() {
    let dir = tempdir("keep");
    std::fs::write(dir.join("out.nc"), b"keep me").unwrap();
    let cfg = config("branches-solar.toml");
    let out = icefold(&dir, &["branches", cfg.to_str().unwrap(), "-o", "out.nc"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("--overwrite"));
    assert_eq!(std::fs::read(dir.join("out.nc")).unwrap(), b"keep me");
    let out = icefold(
        &dir,
        &["branches", cfg.to_str().unwrap(), "-o", "out.nc", "--overwrite"],
    );
    ok(&out);
    assert!(NcReader::open(&dir.join("out.nc")).is_ok());
}

#[test]
fn bad_input_exits_2_naming_the_key_and_leaves_no_file() {
    let dir = tempdir("bad");
    let base = "[grid]\nbands = 12\n";
    let cases: &[(&str, &str, String, &[&str])] = &[
        (
            "sweep",
            "no sweep section",
            base.to_string(),
            &["[sweep]", "sweep"],
        ),
        (
            "branches",
            "no branches section",
            base.to_string(),
            &["[branches]", "branches"],
        ),
        (
            "sweep",
            "unknown control key",
            format!("{base}[sweep]\ncontrol = \"albedo.icee\"\nfrom = 1\nto = 2\n"),
            &["sweep.control", "albedo.icee"],
        ),
        (
            "branches",
            "control without effect",
            format!("{base}[branches]\ncontrol = \"albedo.width_k\"\nfrom = 1\nto = 5\n"),
            &["branches.control", "albedo.width_k", "no effect"],
        ),
        (
            "branches",
            "missing range end",
            format!("{base}[branches]\ncontrol = \"insolation.solar_constant\"\nto = 1500\n"),
            &["branches.from"],
        ),
        (
            "sweep",
            "control value out of range",
            format!("{base}[sweep]\ncontrol = \"greenhouse.co2_ppm\"\nfrom = -5\nto = 400\n"),
            &["greenhouse.co2_ppm", "-5"],
        ),
        (
            "equilibrium",
            "seasonal insolation",
            format!("{base}[insolation]\nkind = \"seasonal\"\n"),
            &["insolation.kind", "seasonal"],
        ),
    ];
    for (cmd, name, text, expect) in cases {
        let cfg = dir.join("bad.toml");
        std::fs::write(&cfg, text).unwrap();
        let out = icefold(&dir, &[cmd, "bad.toml", "-o", "out.nc"]);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{name}: {err}");
        for e in *expect {
            assert!(err.contains(e), "{name}: message lacks {e:?}: {err}");
        }
        assert!(!dir.join("out.nc").exists(), "{name}: no output left");
        let leftovers: Vec<_> = std::fs::read_dir(&dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|n| n != "bad.toml")
            .collect();
        assert!(leftovers.is_empty(), "{name}: {leftovers:?}");
    }
}

#[test]
fn sweep_prints_a_width_only_when_both_tipping_points_are_found() {
    // Issue 12 (cosmetic): "hysteresis width -0.000000" was printed when no grid value lay
    // between the tipping points. Now a width is a real, positive number bounded by found
    // tipping points, or the console, file and inspect say what is missing.
    let dir = tempdir("width");
    let cfg = config("emission-level-co2.toml");
    let run = |name: &str, sets: &[&str]| {
        let mut args = vec!["sweep", cfg.to_str().unwrap(), "-o", name];
        let owned: Vec<String> = sets.iter().map(|s| s.to_string()).collect();
        for s in &owned {
            args.push("--set");
            args.push(s);
        }
        let out = icefold(&dir, &args);
        ok(&out);
        String::from_utf8_lossy(&out.stderr).into_owned()
    };
    let co2 = "sweep.control=greenhouse.co2_ppm";
    // Both tipping points inside the first 1000 ppm step: a positive width.
    let err = run(
        "both.nc",
        &[co2, "sweep.from=1", "sweep.to=1e5", "sweep.steps=101"],
    );
    assert!(!err.contains("-0.000000"), "{err}");
    let w: f64 = err
        .split("hysteresis width ")
        .nth(1)
        .and_then(|s| s.split_whitespace().next())
        .and_then(|s| s.parse().ok())
        .unwrap_or_else(|| panic!("no width in {err}"));
    assert!(w > 1.0 && w < 1.5, "{err}");
    // Started on the snowball inside the bistable range: the legs still differ at 100 ppm,
    // so the lower end is not found and no width is given.
    let err = run(
        "open.nc",
        &[
            co2,
            "sweep.from=100",
            "sweep.to=1e4",
            "sweep.steps=21",
            "initial.temperature_c=-60",
        ],
    );
    assert!(
        err.contains("hysteresis width not reported: the legs still differ at 100"),
        "{err}"
    );
    let r = NcReader::open(&dir.join("open.nc")).unwrap();
    assert!(r.attr_f64("hysteresis_width").unwrap().unwrap().is_nan());
    assert!(r.attr_str("hysteresis_missing").unwrap().is_some());
    let out = icefold(&dir, &["inspect", "open.nc"]);
    ok(&out);
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("hysteresis: width not reported"), "{text}");
}

#[test]
fn log_spacing_refuses_ends_at_or_below_zero_naming_the_key() {
    // Bad input (DESIGN exit codes): ln of a non-positive end is undefined.
    let dir = tempdir("logspacing");
    let base = "[grid]\nbands = 12\n";
    for (cmd, text, key) in [
        ("sweep", format!("{base}[sweep]\ncontrol = \"forcing.constant_wm2\"\nfrom = -5\nto = 5\nspacing = \"log\"\n"), "sweep.spacing"),
        ("branches", format!("{base}[branches]\ncontrol = \"forcing.constant_wm2\"\nfrom = 0\nto = 5\nspacing = \"log\"\n"), "branches.spacing"),
        ("sweep", format!("{base}[sweep]\ncontrol = \"greenhouse.co2_ppm\"\nfrom = 1\nto = 5\nspacing = \"logarithmic\"\n"), "sweep.spacing"),
    ] {
        std::fs::write(dir.join("bad.toml"), text).unwrap();
        let out = icefold(&dir, &[cmd, "bad.toml", "-o", "out.nc"]);
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{err}");
        assert!(err.contains(key) && err.contains("\"linear\""), "{err}");
        assert!(!dir.join("out.nc").exists());
    }
    // Log spacing works for branches too and is recorded on the control variable.
    let cfg = config("emission-level-co2.toml");
    let out = icefold(
        &dir,
        &[
            "branches",
            cfg.to_str().unwrap(),
            "--set",
            "branches.control=greenhouse.co2_ppm",
            "--set",
            "branches.from=0.001",
            "--set",
            "branches.to=1e6",
            "--set",
            "branches.spacing=\"log\"",
            "-o",
            "br.nc",
        ],
    );
    ok(&out);
    let r = NcReader::open(&dir.join("br.nc")).unwrap();
    assert_eq!(r.attr_str("control_spacing").unwrap().as_deref(), Some("log"));
    assert_eq!(
        r.var_attr_str("control", "spacing").unwrap().as_deref(),
        Some("log")
    );
    let folds = r.read_f64("fold_control").unwrap();
    // The four folds of the CO2 curve (tests/tipping.rs), mapped back from ln(ppm).
    for f in [0.0603, 3.188, 4.418, 1805.5] {
        assert!(
            folds.iter().any(|g| (g / f - 1.0).abs() < 1e-3),
            "{f} not in {folds:?}"
        );
    }
}

#[test]
fn log_spaced_regime_maps_find_the_same_folds_and_record_their_axes() {
    // Continuing in ln(CO2) instead of CO2 changes the steps, not the folds: the rows at the
    // range ends (the same values in both maps) have the same folds to the continuation's fold
    // tolerance (1e-7 relative in its variable; 1e-5 allows for the differently placed steps).
    let dir = tempdir("regimeslog");
    let cfg = config("emission-level-co2.toml");
    let map = |name: &str, spacing: &str| {
        let sets = [
            "regimes.control=greenhouse.co2_ppm".to_string(),
            "regimes.from=0.01".into(),
            "regimes.to=1e4".into(),
            "regimes.columns=21".into(),
            "regimes.row_control=transport.diffusivity".into(),
            "regimes.row_from=0.3".into(),
            "regimes.row_to=0.9".into(),
            "regimes.rows=3".into(),
            format!("regimes.spacing=\"{spacing}\""),
            format!("regimes.row_spacing=\"{spacing}\""),
        ];
        let mut args = vec!["regimes", cfg.to_str().unwrap(), "-o", name];
        for s in &sets {
            args.push("--set");
            args.push(s);
        }
        ok(&icefold(&dir, &args));
        NcReader::open(&dir.join(name)).unwrap()
    };
    let (lin, log) = (map("lin.nc", "linear"), map("log.nc", "log"));
    assert_eq!(log.var_attr_str("p1", "spacing").unwrap().as_deref(), Some("log"));
    assert_eq!(log.var_attr_str("p2", "spacing").unwrap().as_deref(), Some("log"));
    assert_eq!(
        lin.var_attr_str("p1", "spacing").unwrap().as_deref(),
        Some("linear")
    );
    let p2 = log.read_f64("p2").unwrap();
    assert!((p2[1] - (0.3f64 * 0.9).sqrt()).abs() < 1e-12, "{p2:?}");
    let p1 = log.read_f64("p1").unwrap();
    assert!((p1[1] / p1[0] - 10f64.powf(0.3)).abs() < 1e-9, "{p1:?}");
    let folds = |r: &NcReader, row: f64| -> Vec<f64> {
        let (c, y) = (r.read_f64("fold_p1").unwrap(), r.read_f64("fold_p2").unwrap());
        let mut v: Vec<f64> = c
            .iter()
            .zip(&y)
            .filter(|(_, b)| (**b - row).abs() < 1e-12)
            .map(|(a, _)| *a)
            .collect();
        v.sort_by(f64::total_cmp);
        v
    };
    for row in [0.3, 0.9] {
        let (a, b) = (folds(&lin, row), folds(&log, row));
        assert_eq!(a.len(), b.len(), "row {row}: {a:?} vs {b:?}");
        for (x, y) in a.iter().zip(&b) {
            assert!((x / y - 1.0).abs() < 1e-5, "row {row}: {a:?} vs {b:?}");
        }
    }
}
