//! Tipping points (issue 3): sweeps against continuation folds, the slope-stability theorem,
//! stability against time stepping, Newton against long runs. Each check names its source.

use icefold::config::{self, Loaded};
use icefold::equilibrium::stability::leading_eigenvalue;
use icefold::equilibrium::{newton, NewtonOptions};
use icefold::integrate::rosenbrock::{Ros2, StepPolicy};
use icefold::integrate::{driver, Integrator};
use icefold::jobs;
use icefold::model::{Model, Workspace};

fn load(name: &str, sets: &[&str]) -> Loaded {
    let path = format!("{}/configs/{name}", env!("CARGO_MANIFEST_DIR"));
    let sets: Vec<String> = sets.iter().map(|s| s.to_string()).collect();
    config::load(std::path::Path::new(&path), &sets).unwrap()
}

#[test]
fn sweep_tipping_points_lie_within_half_a_percent_of_the_folds() {
    // Issue 3 / DESIGN section 3: the quasi-static sweep's tipping points are the saddle-node
    // folds of the equilibrium curve (common practice); 0.5 % allows the sweep's bracketing.
    let sweep = jobs::sweep::run_sweep(&load("sweep-solar.toml", &[]), false).unwrap();
    let set = jobs::branches::run_branches(&load("branches-solar.toml", &[])).unwrap();
    let folds: Vec<f64> = set
        .branches
        .iter()
        .flat_map(|b| b.folds.iter().map(|f| f.control))
        .collect();
    assert!(
        sweep.tipping.len() >= 2,
        "a two-way sweep over the loop tips at least twice: {:?}",
        sweep.tipping
    );
    for t in &sweep.tipping {
        let best = folds
            .iter()
            .map(|f| (f - t.control).abs() / f.abs())
            .fold(f64::INFINITY, f64::min);
        assert!(
            best < 5e-3,
            "tipping point {} has no fold within 0.5 % (folds {folds:?})",
            t.control
        );
    }
    assert!(sweep.hysteresis_width > 0.0);
}

#[test]
fn slope_stability_theorem_and_eigenvalue_sign_changes_at_folds() {
    // Cahalan and North (1979, J. Atmos. Sci. 36): on the partly ice-covered branch, equilibria
    // with dQ/dx_s > 0 are stable and those with dQ/dx_s < 0 unstable; at each fold the leading
    // eigenvalue changes sign. Points next to a fold are left out (the slope there is the
    // difference quotient across the fold).
    let cfg = load("branches-solar.toml", &[]);
    let set = jobs::branches::run_branches(&cfg).unwrap();
    let model = Model::from_spec(&cfg.spec.model);
    let mut checked = 0;
    for b in &set.branches {
        let pts = &b.points;
        let xs: Vec<f64> = pts
            .iter()
            .map(|p| model.ice_edges(&p.state).0.to_radians().sin())
            .collect();
        let near_fold = |k: usize| {
            b.folds
                .iter()
                .any(|f| k + 2 >= f.after_point && k <= f.after_point + 2)
        };
        for k in 1..pts.len().saturating_sub(1) {
            if near_fold(k) || !(0.05..0.97).contains(&xs[k]) {
                continue;
            }
            let dq = pts[k + 1].control - pts[k - 1].control;
            let dx = xs[k + 1] - xs[k - 1];
            if dx.abs() < 1e-9 || (dq / dx).abs() < 1e-6 {
                continue;
            }
            let stable = pts[k].leading < 0.0;
            assert_eq!(
                stable,
                dq / dx > 0.0,
                "point {k}: S0 {} x_s {} leading {} dQ/dx_s {}",
                pts[k].control,
                xs[k],
                pts[k].leading,
                dq / dx
            );
            checked += 1;
        }
        for f in &b.folds {
            let k = f.after_point;
            if k + 1 < pts.len() {
                let (a, c) = (pts[k].leading, pts[k + 1].leading);
                assert!(
                    a * c < 0.0,
                    "fold at {}: leading eigenvalue {a} then {c} does not change sign",
                    f.control
                );
            }
        }
    }
    assert!(checked > 50, "only {checked} points checked");
}

#[test]
fn leading_eigenvalue_matches_the_decay_of_a_small_perturbation() {
    // Linear stability (common practice): a small perturbation of a stable equilibrium decays at
    // the rate of the leading eigenvalue once faster modes have died out (step and smooth
    // albedo). Fixed steps of
    // 0.02 years keep h * lambda near 1e-3, so the scheme's own rate error is ~1e-6.
    for sets in [vec![], vec!["albedo.kind=\"smooth\"", "albedo.width_k=3"]] {
        let cfg = load("classic-step-albedo.toml", &sets);
        let model = Model::from_spec(&cfg.spec.model);
        let eq = newton(
            &model,
            0.0,
            &model.initial_state(&cfg.spec.initial),
            NewtonOptions::default(),
        )
        .unwrap()
        .state;
        let (lead, _) = leading_eigenvalue(&model, 0.0, &eq);
        assert!(lead < 0.0);
        let start: Vec<f64> = eq.iter().map(|t| t + 1e-2).collect();
        let mut r = Ros2::new(&model, 0.0, &start, 400.0, StepPolicy::Fixed(0.02), u64::MAX);
        let size = |y: &[f64]| y.iter().zip(&eq).map(|(a, b)| (a - b).abs()).fold(0.0, f64::max);
        // The second mode decays 4x faster: by year 60 its share is below 1e-5; at year 120 the
        // perturbation (~3e-6 K) is still far above the equilibrium's own error (~1e-12 K).
        let (t1, t2) = (60.0, 120.0);
        let mut y = vec![0.0; eq.len()];
        r.advance_to(t1, &mut y).unwrap();
        let d1 = size(&y);
        r.advance_to(t2, &mut y).unwrap();
        let d2 = size(&y);
        let rate = (d2 / d1).ln() / (t2 - t1);
        assert!(
            ((rate - lead) / lead).abs() < 0.02,
            "{sets:?}: measured decay {rate} per year vs leading eigenvalue {lead}"
        );
    }
}

#[test]
fn newton_closes_the_budget_and_matches_a_long_run() {
    // Energy conservation (DESIGN section 2): at equilibrium global-mean absorbed sunlight equals
    // global-mean OLR; Newton's residual target 1e-9 W m-2 per band bounds the imbalance. A long implicit
    // run from the same start (3000 years, 40 e-folding times of the slowest mode) reaches the
    // same state.
    let cfg = load(
        "classic-step-albedo.toml",
        &["time.years=3000", "time.tolerance=1e-7"],
    );
    let model = Model::from_spec(&cfg.spec.model);
    let y0 = model.initial_state(&cfg.spec.initial);
    let eq = newton(&model, 0.0, &y0, NewtonOptions::default()).unwrap().state;
    let mut ws = Workspace::new(model.len());
    let b = model.budget(0.0, &eq, &mut ws);
    let imbalance = model.grid.mean(&b.absorbed) - model.grid.mean(&b.olr);
    assert!(imbalance.abs() < 1e-8, "imbalance {imbalance} W m-2");
    let mut integ = driver::integrator(&model, &cfg.spec.time, 0.0, &y0, 3000.0);
    let mut y = vec![0.0; model.len()];
    integ.advance_to(3000.0, &mut y).unwrap();
    let diff = y.iter().zip(&eq).map(|(a, b)| (a - b).abs()).fold(0.0, f64::max);
    assert!(diff < 1e-6, "run and Newton differ by {diff} K");
}
