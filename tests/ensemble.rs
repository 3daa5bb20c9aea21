//! Ensembles through the binary (issue 4): results identical on 1 and 2 threads, merged shards
//! identical to the single run, Latin hypercube samples of each distribution, the Gregory
//! regression and the doubled-CO2 sensitivity against the linear model's exact answers, and bad
//! ensemble input exiting 2.

use icefold::output::NcReader;
use std::path::{Path, PathBuf};
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_icefold");

fn tempdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("icefold-ensemble-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// A small step-albedo hemisphere with four sampled keys, one of each distribution, and every
/// optional output on.
const SMALL: &str = "[grid]\nbands = 18\n\
[insolation]\nsolar_constant = 1337.6\ns2 = -0.482\n\
[albedo]\nice_free = 0.303\nice_free_p2 = 0.0779\nice = 0.62\nfreeze_temperature_c = -10.0\n\
[longwave]\nkind = \"linear\"\na = 203.3\nb = 2.09\n[transport]\ndiffusivity = 0.52\n\
[initial]\ntemperature_c = 10.0\ntemperature_p2_k = -30.0\n\
[time]\nyears = 30\noutput_every_years = 1.0\n\
[ensemble]\nmembers = 24\nseed = 11\nfields = true\nsensitivity = true\n\
[[ensemble.parameters]]\nkey = \"transport.diffusivity\"\ndistribution = \"uniform\"\nmin = 0.4\nmax = 0.7\n\
[[ensemble.parameters]]\nkey = \"longwave.b\"\ndistribution = \"normal\"\nmean = 2.09\nsd = 0.1\n\
[[ensemble.parameters]]\nkey = \"heat_capacity.value\"\ndistribution = \"log_uniform\"\nmin = 1e8\nmax = 1e9\n\
[[ensemble.parameters]]\nkey = \"albedo.ice\"\ndistribution = \"values\"\nvalues = [0.55, 0.6, 0.65]\n";

/// Run the binary with `envs`; returns (exit code, stderr).
fn icefold(args: &[&str], envs: &[(&str, &str)]) -> (i32, String) {
    let out = Command::new(BIN)
        .args(args)
        .envs(envs.iter().copied())
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn ok(args: &[&str], envs: &[(&str, &str)]) {
    let (code, err) = icefold(args, envs);
    assert_eq!(code, 0, "icefold {args:?}: {err}");
}

/// An attribute's value as text, whatever its type.
fn attr_text(r: &NcReader, var: Option<&str>, name: &str) -> String {
    let (s, i, f) = match var {
        None => (
            r.attr_str(name).ok().flatten(),
            r.attr_i64(name).ok().flatten(),
            r.attr_f64(name).ok().flatten(),
        ),
        Some(v) => (
            r.var_attr_str(v, name).ok().flatten(),
            r.var_attr_i64(v, name).ok().flatten(),
            r.var_attr_f64(v, name).ok().flatten(),
        ),
    };
    match (s, i, f) {
        (Some(s), _, _) => format!("str {s}"),
        (_, Some(i), _) => format!("i64 {i}"),
        (_, _, Some(f)) => format!("f64 {:x}", f.to_bits()),
        _ => "?".into(),
    }
}

/// Assert two files hold the same variables, dimensions, values (bit for bit, NaN included) and
/// attributes, except the global attributes listed in `except`.
fn assert_same(a: &Path, b: &Path, except: &[&str]) {
    let (ra, rb) = (NcReader::open(a).unwrap(), NcReader::open(b).unwrap());
    let vars = ra.var_names().unwrap();
    assert_eq!(vars, rb.var_names().unwrap(), "variables");
    assert_eq!(ra.dim_names().unwrap(), rb.dim_names().unwrap(), "dimensions");
    for v in &vars {
        assert_eq!(ra.var_dims(v).unwrap(), rb.var_dims(v).unwrap(), "{v}: dims");
        let (x, y) = (ra.read_f64(v).unwrap(), rb.read_f64(v).unwrap());
        assert_eq!(x.len(), y.len(), "{v}: length");
        for (k, (p, q)) in x.iter().zip(&y).enumerate() {
            assert_eq!(p.to_bits(), q.to_bits(), "{v}[{k}]: {p} vs {q}");
        }
        let names = ra.var_attr_names(v).unwrap();
        assert_eq!(names, rb.var_attr_names(v).unwrap(), "{v}: attributes");
        for n in &names {
            assert_eq!(attr_text(&ra, Some(v), n), attr_text(&rb, Some(v), n), "{v}:{n}");
        }
    }
    let names = ra.attr_names().unwrap();
    assert_eq!(names, rb.attr_names().unwrap(), "global attributes");
    for n in names.iter().filter(|n| !except.contains(&n.as_str())) {
        assert_eq!(
            attr_text(&ra, None, n),
            attr_text(&rb, None, n),
            "global attribute {n}"
        );
    }
}

#[test]
fn results_are_identical_on_one_and_two_threads() {
    let dir = tempdir("threads");
    let cfg = dir.join("small.toml");
    std::fs::write(&cfg, SMALL).unwrap();
    let c = cfg.to_str().unwrap();
    let one = dir.join("one.nc");
    let two = dir.join("two.nc");
    let env2 = dir.join("env2.nc");
    ok(
        &["ensemble", c, "-o", one.to_str().unwrap(), "--threads", "1"],
        &[],
    );
    ok(
        &["ensemble", c, "-o", two.to_str().unwrap(), "--threads", "2"],
        &[],
    );
    ok(
        &["ensemble", c, "-o", env2.to_str().unwrap()],
        &[("RAYON_NUM_THREADS", "2")],
    );
    let differ = ["creation_time", "history", "command_line"];
    assert_same(&one, &two, &differ);
    assert_same(&one, &env2, &differ);
    let r = NcReader::open(&one).unwrap();
    assert_eq!(
        r.var_dims("surface_temperature").unwrap(),
        ["member", "time", "lat"]
    );
    assert_eq!(r.var_shape("global_mean_temperature").unwrap(), [24, 31]);
    // The members really differ (the samples reach the model).
    let g = r.read_f64("global_mean_temperature").unwrap();
    let finals: Vec<f64> = g.chunks(31).map(|c| c[30]).collect();
    assert!(finals.iter().any(|f| (f - finals[0]).abs() > 0.1), "{finals:?}");
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn merged_shards_are_the_single_run_value_for_value() {
    let dir = tempdir("shards");
    let cfg = dir.join("small.toml");
    std::fs::write(&cfg, SMALL).unwrap();
    let c = cfg.to_str().unwrap();
    let single = dir.join("single.nc");
    ok(&["ensemble", c, "-o", single.to_str().unwrap()], &[]);
    // Five shards of 24 members (4 or 5 each), merged in reverse order.
    let mut shards = Vec::new();
    for k in 0..5 {
        let p = dir.join(format!("shard{k}.nc"));
        ok(
            &[
                "ensemble",
                c,
                "--shard",
                &format!("{k}/5"),
                "-o",
                p.to_str().unwrap(),
            ],
            &[],
        );
        shards.push(p.to_str().unwrap().to_string());
    }
    let r = NcReader::open(Path::new(&shards[1])).unwrap();
    assert_eq!(r.attr_str("shard").unwrap().as_deref(), Some("1/5"));
    assert_eq!(r.attr_i64("member_first").unwrap(), Some(4));
    assert_eq!(r.read_f64("member").unwrap(), [4.0, 5.0, 6.0, 7.0, 8.0]);
    drop(r);
    let merged = dir.join("merged.nc");
    let mut args = vec!["merge"];
    args.extend(shards.iter().rev().map(String::as_str));
    args.extend(["-o", merged.to_str().unwrap()]);
    ok(&args, &[]);
    assert_same(&single, &merged, &["creation_time", "history", "command_line"]);
    // Shards that do not tile the ensemble are refused (exit 2), naming the problem.
    let bad = dir.join("bad.nc");
    let (code, err) = icefold(
        &["merge", &shards[0], &shards[2], "-o", bad.to_str().unwrap()],
        &[],
    );
    assert_eq!(code, 2);
    assert!(err.contains("missing"), "{err}");
    let (code, err) = icefold(
        &[
            "merge",
            &shards[0],
            &shards[0],
            &shards[1],
            "-o",
            bad.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(code, 2);
    assert!(err.contains("overlap"), "{err}");
    let other = dir.join("other.nc");
    ok(
        &[
            "ensemble",
            c,
            "--shard",
            "1/5",
            "--set",
            "ensemble.seed=12",
            "-o",
            other.to_str().unwrap(),
        ],
        &[],
    );
    let (code, err) = icefold(
        &[
            "merge",
            &shards[0],
            other.to_str().unwrap(),
            "-o",
            bad.to_str().unwrap(),
        ],
        &[],
    );
    assert_eq!(code, 2);
    assert!(err.contains("not shards of the same ensemble"), "{err}");
    assert!(!bad.exists());
    // `inspect` summarises the ensemble.
    let out = Command::new(BIN)
        .args(["inspect", merged.to_str().unwrap()])
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&out.stdout);
    for line in [
        "members:    24 (from 0 of 24), seed 11",
        "sampled:    longwave.b normal(mean 2.09, sd 0.1)",
        "climate_sensitivity_2xco2 (min / median / max)",
    ] {
        assert!(text.contains(line), "no `{line}` in\n{text}");
    }
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn samples_form_a_latin_hypercube_of_each_distribution() {
    // Reference: McKay, Beckman and Conover (1979, Technometrics 21): each of the M strata of
    // every parameter's probability holds exactly one member.
    let dir = tempdir("lhs");
    let cfg = dir.join("small.toml");
    std::fs::write(&cfg, SMALL.replace("years = 30", "years = 2")).unwrap();
    let out = dir.join("e.nc");
    ok(
        &["ensemble", cfg.to_str().unwrap(), "-o", out.to_str().unwrap()],
        &[],
    );
    let r = NcReader::open(&out).unwrap();
    let m = 24.0;
    let strata = |u: Vec<f64>| {
        let mut s: Vec<usize> = u.iter().map(|x| (x * m).floor() as usize).collect();
        s.sort_unstable();
        s
    };
    let all: Vec<usize> = (0..24).collect();
    let d = r.read_f64("sampled_transport_diffusivity").unwrap();
    assert_eq!(strata(d.iter().map(|v| (v - 0.4) / 0.3).collect()), all);
    let h = r.read_f64("sampled_heat_capacity_value").unwrap();
    assert_eq!(
        strata(h.iter().map(|v| (v / 1e8).ln() / 10.0_f64.ln()).collect()),
        all
    );
    // Normal: count members between the quantiles of consecutive strata.
    let b = r.read_f64("sampled_longwave_b").unwrap();
    for k in 0..24 {
        let q = |p: f64| {
            if p <= 0.0 {
                f64::NEG_INFINITY
            } else if p >= 1.0 {
                f64::INFINITY
            } else {
                2.09 + 0.1 * icefold::ensemble::normal_quantile(p)
            }
        };
        let (lo, hi) = (q(k as f64 / m), q((k + 1) as f64 / m));
        assert_eq!(
            b.iter().filter(|v| **v >= lo && **v < hi).count(),
            1,
            "stratum {k}"
        );
    }
    let a = r.read_f64("sampled_albedo_ice").unwrap();
    for v in [0.55, 0.6, 0.65] {
        assert_eq!(a.iter().filter(|x| **x == v).count(), 8);
    }
    assert_eq!(
        r.var_attr_str("sampled_albedo_ice", "config_key")
            .unwrap()
            .as_deref(),
        Some("albedo.ice")
    );
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn gregory_regression_and_sensitivity_of_a_linear_model_without_ice() {
    // With linear OLR and no ice (freezing far below any temperature reached), the global-mean
    // imbalance is N = F - B (T - T_ref) exactly (transport sums to zero), so the Gregory
    // regression (Gregory et al. 2004, Geophys. Res. Lett. 31) recovers -B, and the doubled-CO2
    // equilibrium warming is k ln 2 / B (Myhre et al. 1998: k = 5.35 W m-2). Round-off bounds
    // the error far below the 1 % the issue asks; 1e-6 is asserted.
    let dir = tempdir("gregory");
    let cfg = dir.join("linear.toml");
    std::fs::write(
        &cfg,
        "[grid]\nbands = 24\n[albedo]\nfreeze_temperature_c = -200.0\n[longwave]\nkind = \"linear\"\n\
         [greenhouse]\nco2_ppm = 1120.0\n[initial]\ntemperature_c = 5.0\n[time]\nyears = 60\n\
         [ensemble]\nmembers = 8\nsensitivity = true\n\
         [[ensemble.parameters]]\nkey = \"longwave.b\"\nmin = 1.5\nmax = 2.5\n",
    )
    .unwrap();
    let out = dir.join("e.nc");
    ok(
        &["ensemble", cfg.to_str().unwrap(), "-o", out.to_str().unwrap()],
        &[],
    );
    let r = NcReader::open(&out).unwrap();
    let b = r.read_f64("sampled_longwave_b").unwrap();
    let slope = r.read_f64("effective_feedback_parameter").unwrap();
    let ecs = r.read_f64("climate_sensitivity_2xco2").unwrap();
    for k in 0..8 {
        assert!(
            (slope[k] / -b[k] - 1.0).abs() < 1e-6,
            "member {k}: slope {} vs -B = {}",
            slope[k],
            -b[k]
        );
        let want = 5.35 * 2.0_f64.ln() / b[k];
        assert!(
            (ecs[k] / want - 1.0).abs() < 1e-6,
            "member {k}: ECS {} vs {want}",
            ecs[k]
        );
    }
    // The same numbers in a run file's attributes, shown by `inspect`.
    let run = dir.join("run.nc");
    ok(
        &[
            "run",
            cfg.to_str().unwrap(),
            "-o",
            run.to_str().unwrap(),
            "--set",
            "equilibrium.sensitivity=true",
        ],
        &[],
    );
    let r = NcReader::open(&run).unwrap();
    let g = r.attr_f64("gregory_feedback_wm2_per_k").unwrap().unwrap();
    assert!((g / -2.09 - 1.0).abs() < 1e-6, "{g}");
    let e = r.attr_f64("ecs_2xco2_k").unwrap().unwrap();
    assert!((e / (5.35 * 2.0_f64.ln() / 2.09) - 1.0).abs() < 1e-6, "{e}");
    assert_eq!(r.attr_f64("ice_edge_sensitivity_deg_per_wm2").unwrap(), Some(0.0));
    let text = String::from_utf8_lossy(
        &Command::new(BIN)
            .args(["inspect", run.to_str().unwrap()])
            .output()
            .unwrap()
            .stdout,
    )
    .into_owned();
    assert!(
        text.contains("gregory:    effective feedback -2.0900 W m-2 K-1"),
        "{text}"
    );
    assert!(
        text.contains("2xCO2:      equilibrium warming 1.7743 K"),
        "{text}"
    );
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn ice_edge_sensitivity_is_the_derivative_of_the_equilibrium_edge() {
    // On the classic step-albedo configuration the ice edge retreats poleward under a positive
    // forcing. The file's local derivative (central difference over +-0.05 W m-2) is checked
    // against the secant of the base equilibria of two more runs at forcing.constant_wm2 =
    // +-0.25 W m-2 (common practice: tangent against a wider secant on a smooth branch; measured
    // 3.73 against 3.92 degrees per W m-2, the edge band makes the curve slightly wavy, so 20 %).
    let dir = tempdir("edge");
    let cfg = format!("{}/configs/classic-step-albedo.toml", env!("CARGO_MANIFEST_DIR"));
    let edge = |f: f64, what: &str| {
        let run = dir.join(format!("run{f}.nc"));
        ok(
            &[
                "run",
                &cfg,
                "-o",
                run.to_str().unwrap(),
                "--overwrite",
                "--set",
                "time.years=1",
                "--set",
                "equilibrium.sensitivity=true",
                "--set",
                &format!("forcing.constant_wm2={f}"),
            ],
            &[],
        );
        NcReader::open(&run).unwrap().attr_f64(what).unwrap().unwrap()
    };
    let local = edge(0.0, "ice_edge_sensitivity_deg_per_wm2");
    let secant = (edge(0.25, "ice_edge_base_deg") - edge(-0.25, "ice_edge_base_deg")) / 0.5;
    assert!(local > 0.0 && secant > 0.0, "{local} {secant}");
    assert!(
        (local / secant - 1.0).abs() < 0.2,
        "local {local} vs secant {secant}"
    );
    let base = edge(0.0, "ice_edge_base_deg");
    assert!(base > 65.0 && base < 80.0, "{base}");
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn bad_ensemble_input_exits_2() {
    let dir = tempdir("bad");
    let cfg = dir.join("c.toml");
    let out = dir.join("o.nc");
    let o = out.to_str().unwrap();
    let c = cfg.to_str().unwrap();
    for (what, text, args, fragment) in [
        ("no section", "[grid]\nbands = 6\n", vec![], "no [ensemble] section"),
        (
            "integer key",
            "[ensemble]\n[[ensemble.parameters]]\nkey = \"grid.bands\"\nmin = 1\nmax = 5\n",
            vec![],
            "ensemble.parameters[0].key",
        ),
        (
            "key the model lacks",
            "[longwave]\nkind = \"linear\"\n[ensemble]\n[[ensemble.parameters]]\nkey = \"longwave.emissivity\"\nmin = 0.5\nmax = 0.7\n",
            vec![],
            "longwave.emissivity",
        ),
        (
            "bad range",
            "[ensemble]\n[[ensemble.parameters]]\nkey = \"albedo.ice\"\nmin = 0.7\nmax = 0.5\n",
            vec![],
            "ensemble.parameters[0].max",
        ),
        (
            "sample out of the key's range",
            "[ensemble]\nmembers = 50\n[[ensemble.parameters]]\nkey = \"albedo.ice\"\ndistribution = \"normal\"\nmean = 0.95\nsd = 0.2\n",
            vec![],
            "albedo.ice",
        ),
        (
            "bad shard",
            "[ensemble]\n[[ensemble.parameters]]\nkey = \"albedo.ice\"\nmin = 0.5\nmax = 0.7\n",
            vec!["--shard", "3/3"],
            "--shard 3/3",
        ),
    ] {
        std::fs::write(&cfg, text).unwrap();
        let mut a = vec!["ensemble", c, "-o", o];
        a.extend(args);
        let (code, err) = icefold(&a, &[]);
        assert_eq!(code, 2, "{what}: {err}");
        assert!(err.contains(fragment), "{what}: no `{fragment}` in {err}");
        assert!(!out.exists(), "{what}");
    }
    let _ = std::fs::remove_dir_all(&dir);
}
