//! Physics checks against published and analytic results (DESIGN section 6), through the
//! library: each test names its source.

use icefold::config::{self, Loaded};
use icefold::equilibrium::{newton, NewtonOptions};
use icefold::grid::{p2, p4};
use icefold::integrate::driver;
use icefold::model::{Model, Workspace};
use std::path::Path;

fn load(text: &str, sets: &[&str]) -> Loaded {
    let sets: Vec<String> = sets.iter().map(|s| s.to_string()).collect();
    config::load_str(text, "test.toml", Path::new("."), &sets).expect("valid config")
}

fn classic() -> String {
    std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/configs/classic-step-albedo.toml"
    ))
    .unwrap()
}

fn equilibrium(model: &Model, start_k: f64) -> Vec<f64> {
    let y0 = vec![start_k; model.len()];
    newton(model, 0.0, &y0, NewtonOptions::default())
        .expect("Newton converges")
        .state
}

/// Ice-free exact solution (North 1975, J. Atmos. Sci. 32): with constant D, ice-free albedo
/// a0 + a2 P2 and insolation Q (1 + s2 P2), the steady state is sum_n T_n P_n(x), n = 0, 2, 4,
/// with T_n = f_n / (B + n(n+1) D) and f_n the Legendre coefficients of the absorbed sunlight
/// minus A (P2^2 = P0/5 + 2 P2/7 + 18 P4/35).
fn ice_free_max_error(bands: usize) -> f64 {
    let (q, s2, a0, a2, a, b, d) = (340.0, -0.48, 0.3, 0.08, 203.3, 2.09, 0.6);
    let text = format!(
        "[grid]\nbands = {bands}\n[insolation]\nsolar_constant = {}\ns2 = {s2}\n\
         [albedo]\nice_free = {a0}\nice_free_p2 = {a2}\nice = {a0}\nfreeze_temperature_c = -250\n\
         [longwave]\na = {a}\nb = {b}\n[transport]\ndiffusivity = {d}\n",
        4.0 * q
    );
    let cfg = load(&text, &[]);
    let model = Model::from_spec(&cfg.spec.model);
    let t = equilibrium(&model, 280.0);
    let c0 = 1.0 - a0;
    let f0 = q * (c0 - a2 * s2 / 5.0) - a;
    let f2 = q * (c0 * s2 - a2 - 2.0 / 7.0 * a2 * s2);
    let f4 = q * (-18.0 / 35.0 * a2 * s2);
    let (t0, t2, t4) = (f0 / b, f2 / (b + 6.0 * d), f4 / (b + 20.0 * d));
    model
        .grid
        .x_centres
        .iter()
        .zip(&t)
        .map(|(&x, &ti)| (ti - 273.15 - (t0 + t2 * p2(x) + t4 * p4(x))).abs())
        .fold(0.0, f64::max)
}

#[test]
fn ice_free_exact_solution_and_second_order_convergence() {
    let e45 = ice_free_max_error(45);
    let e90 = ice_free_max_error(90);
    let e180 = ice_free_max_error(180);
    assert!(e90 < 0.02, "max error at 90 bands {e90} K");
    // Second order: halving dx divides the error by 4 (3.5..4.5 allows the higher-order terms).
    for (coarse, fine) in [(e45, e90), (e90, e180)] {
        let ratio = coarse / fine;
        assert!(
            (3.5..4.5).contains(&ratio),
            "convergence ratio {ratio} ({coarse} / {fine})"
        );
    }
}

#[test]
fn equilibrium_closes_the_global_energy_budget() {
    // Energy conservation of the transport (DESIGN section 2): at a steady state the global-mean
    // absorbed sunlight equals the global-mean OLR. Newton's residual is below 1e-9 W m-2, so the
    // budget closes to that level plus round-off.
    for sets in [
        vec![],
        vec![
            "grid.domain=\"globe\"",
            "grid.spacing=\"equal_angle\"",
            "albedo.kind=\"smooth\"",
        ],
        vec!["transport.kind=\"relaxation\"", "insolation.kind=\"annual_mean\""],
    ] {
        let cfg = load(&classic(), &sets);
        let model = Model::from_spec(&cfg.spec.model);
        let t = equilibrium(&model, 288.0);
        let mut ws = Workspace::new(model.len());
        let b = model.budget(0.0, &t, &mut ws);
        let imbalance = model.grid.mean(&b.absorbed) - model.grid.mean(&b.olr);
        assert!(imbalance.abs() < 1e-6, "{sets:?}: imbalance {imbalance} W m-2");
    }
}

#[test]
fn classic_config_puts_the_ice_edge_near_72_degrees() {
    // Calibration stated in configs/classic-step-albedo.toml: x_s about 0.95 (observed ice edge
    // ~72 degrees; North, Cahalan and Coakley 1981) at Q = 334.4 W m-2.
    let cfg = load(&classic(), &[]);
    let model = Model::from_spec(&cfg.spec.model);
    let y0 = model.initial_state(&cfg.spec.initial);
    let t = newton(&model, 0.0, &y0, NewtonOptions::default()).unwrap().state;
    let (edge, _) = model.ice_edges(&t);
    let xs = edge.to_radians().sin();
    assert!((xs - 0.95).abs() < 0.01, "x_s = {xs} (edge {edge} degrees)");
}

#[test]
fn one_band_gray_body_planet_is_at_254_6_kelvin() {
    // Stefan-Boltzmann (CODATA 2018 sigma): T = (S0 (1 - 0.3) / (4 sigma))^(1/4) = 254.58 K for
    // S0 = 1361 W m-2 (common practice: about 255 K).
    let text = "[grid]\ndomain = \"globe\"\nbands = 1\n[insolation]\nsolar_constant = 1361\ns2 = 0\n\
                [albedo]\nice_free = 0.3\nice = 0.3\n[longwave]\nkind = \"gray_body\"\nemissivity = 1.0\n";
    let cfg = load(text, &[]);
    let model = Model::from_spec(&cfg.spec.model);
    let t = equilibrium(&model, 250.0);
    assert!((t[0] - 254.6).abs() < 0.1, "T = {}", t[0]);
    // And a long implicit run reaches the same state.
    let mut integ = driver::integrator(&model, &cfg.spec.time, 0.0, &[288.0], 500.0);
    let mut out = [0.0];
    integ.advance_to(500.0, &mut out).unwrap();
    assert!((out[0] - t[0]).abs() < 1e-6, "run {} vs Newton {}", out[0], t[0]);
}

#[test]
fn co2_doubling_forcing_is_3_71() {
    // Myhre et al. (1998): 5.35 ln 2 = 3.708 W m-2; through the config and the model drivers.
    let cfg = load(
        &classic(),
        &["greenhouse.co2_ppm=560", "greenhouse.reference_co2_ppm=280"],
    );
    let model = Model::from_spec(&cfg.spec.model);
    assert!((model.drivers.greenhouse_wm2 - 3.708).abs() < 1e-3);
}

fn run_to(cfg: &Loaded, sets: &[&str], years: f64) -> Vec<f64> {
    let mut c = cfg.clone();
    for s in sets {
        let (k, v) = s.split_once('=').unwrap();
        let text = c.resolved_text();
        c = config::load_str(&text, "t", Path::new("."), &[format!("{k}={v}")]).unwrap();
    }
    let model = Model::from_spec(&c.spec.model);
    let y0 = model.initial_state(&c.spec.initial);
    let mut integ = driver::integrator(&model, &c.spec.time, 0.0, &y0, years);
    let mut out = vec![0.0; model.len()];
    integ.advance_to(years, &mut out).unwrap();
    out
}

#[test]
fn dopri5_dop853_and_implicit_agree_after_100_years() {
    // Common practice: independent schemes on the same discrete equations agree to within
    // their tolerances. Tolerances 1e-6 K per step give global errors well below 0.01 K.
    let cfg = load(
        &classic(),
        &[
            "grid.bands=18",
            "time.tolerance=1e-6",
            "time.stiffness_check=false",
        ],
    );
    let imp = run_to(&cfg, &["time.method=\"implicit\""], 100.0);
    let d5 = run_to(&cfg, &["time.method=\"dopri5\""], 100.0);
    let d8 = run_to(&cfg, &["time.method=\"dop853\""], 100.0);
    for i in 0..imp.len() {
        assert!(
            (imp[i] - d5[i]).abs() < 0.01,
            "band {i}: implicit {} dopri5 {}",
            imp[i],
            d5[i]
        );
        assert!(
            (imp[i] - d8[i]).abs() < 0.01,
            "band {i}: implicit {} dop853 {}",
            imp[i],
            d8[i]
        );
    }
}

#[test]
fn implicit_scheme_is_second_order() {
    // ROS2 is second order (Verwer et al. 1999): halving the fixed step divides the error at a
    // fixed time by ~4. Smooth albedo keeps the right-hand side smooth; the reference is a run
    // with a 16x shorter step (its own error is 256x smaller than the coarsest).
    let cfg = load(
        &classic(),
        &[
            "grid.bands=30",
            "albedo.kind=\"smooth\"",
            "heat_capacity.value=2e7",
        ],
    );
    let at = |days: f64| run_to(&cfg, &[&format!("time.step_days={days}")], 5.0);
    let reference = at(365.25 / 64.0);
    let err = |y: &[f64]| {
        y.iter()
            .zip(&reference)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max)
    };
    let e1 = err(&at(365.25 / 4.0));
    let e2 = err(&at(365.25 / 8.0));
    let e3 = err(&at(365.25 / 16.0));
    for (a, b) in [(e1, e2), (e2, e3)] {
        let ratio = a / b;
        assert!((3.4..4.6).contains(&ratio), "error ratio {ratio} ({a} / {b})");
    }
}

/// The heating Jacobian (tridiagonal plus rank one) as a dense row-major matrix.
fn dense_jacobian(model: &Model, temps: &[f64], fused: bool) -> (Vec<f64>, Vec<f64>) {
    let n = model.len();
    let mut ws = Workspace::new(n);
    let mut jac = icefold::linalg::Tridiag::zeros(n);
    let mut g = vec![0.0; n];
    if fused {
        model.heating_with_jacobian(0.0, temps, &mut ws, &mut g, &mut jac);
    } else {
        model.heating(0.0, temps, &mut ws, &mut g);
        model.heating_jacobian(0.0, temps, &mut ws, &mut jac);
    }
    (jac.to_dense(&model.grid.weights), g)
}

#[test]
fn edge_balance_jacobian_matches_finite_differences() {
    // Central differences of the heating (common practice) against the analytic Jacobian of
    // the step albedo's edge-balance rule (relaxation transport), for linear and gray-body OLR
    // and with time-varying-style drivers (solar, OLR and transport scales), on a profile with
    // several bands inside their ramps. Step 1e-5 K: truncation ~1e-10 (G is piecewise
    // quadratic at most in T away from the ramp ends, which the state avoids by > 1e-3 K),
    // round-off ~1e-16 * 400 / 1e-5 ~ 1e-8 W m-2 K-1; tolerance 1e-6.
    let base = "[grid]\nbands = 24\ndomain = \"globe\"\nspacing = \"equal_angle\"\n\
                [insolation]\nsolar_constant = 1370\ns2 = -0.482\n\
                [albedo]\nice_free = 0.30\nice_free_p2 = 0.06\nice = 0.62\nfreeze_temperature_c = -10\n\
                [transport]\nkind = \"relaxation\"\nrelaxation_rate = 3.04\n";
    let linear = format!("{base}[longwave]\na = 202\nb = 1.9\n");
    let gray = format!("{base}[longwave]\nkind = \"gray_body\"\nemissivity = 0.61\n");
    let mut in_ramp = 0;
    for text in [linear, gray] {
        let cfg = load(&text, &[]);
        let mut model = Model::from_spec(&cfg.spec.model);
        assert!(model.uses_edge_balance());
        for scaled in [false, true] {
            if scaled {
                model.drivers.solar_scale = 0.97;
                model.drivers.olr_scale = 1.02;
                model.drivers.olr_slope_wm2_per_k = 0.1;
                model.drivers.transport_scale = 1.3;
            }
            let n = model.len();
            // Warm equator, cold poles: a 30 K drop across |x| = 0.55 +- 0.25 puts a few
            // bands in each hemisphere inside their ramps (about 14 K wide here).
            let t: Vec<f64> = model
                .grid
                .x_centres
                .iter()
                .map(|x| 263.15 + 0.3 - 60.0 * (x.abs() - 0.55))
                .collect();
            let mut alb = vec![0.0; n];
            let mut ws = Workspace::new(n);
            model.albedo_at(0.0, &t, &mut ws, &mut alb);
            let af = &model.albedo.ice_free;
            in_ramp += (0..n)
                .filter(|&i| alb[i] > af[i] + 1e-9 && alb[i] < model.albedo.ice - 1e-9)
                .count();
            let (jac, g) = dense_jacobian(&model, &t, false);
            let (jac_fused, g_fused) = dense_jacobian(&model, &t, true);
            let h = 1e-5;
            for j in 0..n {
                let (mut tp, mut tm) = (t.clone(), t.clone());
                tp[j] += h;
                tm[j] -= h;
                let (gp, gm) = (
                    dense_jacobian(&model, &tp, false).1,
                    dense_jacobian(&model, &tm, false).1,
                );
                for i in 0..n {
                    let fd = (gp[i] - gm[i]) / (2.0 * h);
                    let an = jac[i * n + j];
                    assert!(
                        (fd - an).abs() < 1e-6,
                        "scaled {scaled} row {i} column {j}: finite difference {fd} vs {an}"
                    );
                    // The fused pass evaluates the same expressions.
                    assert!((jac_fused[i * n + j] - an).abs() <= 1e-12 * (1.0 + an.abs()));
                }
            }
            for i in 0..n {
                assert!((g_fused[i] - g[i]).abs() <= 1e-12 * (1.0 + g[i].abs()));
            }
        }
    }
    assert!(
        in_ramp >= 8,
        "{in_ramp} bands inside their ramps: the check is not vacuous"
    );
}
