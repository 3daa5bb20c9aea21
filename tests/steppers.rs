//! One harness for every time-stepping method (ROS2 with a fixed step, adaptive ROS2, Dopri5,
//! Dop853) on every reference case (ice free with an exact global mean, North's (1975) step
//! albedo with diffusion, Budyko's (1969) relaxation transport, a seasonal globe): the methods
//! agree on the result, and the step and evaluation counts are pinned exactly (snapshot
//! style), so any change to a stepper shows up here. When a change is intended, the failure
//! message prints the new table to paste below.

use icefold::config::{self, Loaded};
use icefold::integrate::driver::{self, Observer, ObserverError};
use icefold::model::{Model, Workspace};
use std::path::Path;

/// Keeps nothing: the harness looks at the final state and the counters only.
struct Nothing;

impl Observer for Nothing {
    fn record(&mut self, _: f64, _: &[f64]) -> Result<(), ObserverError> {
        Ok(())
    }
    fn accumulate(&mut self, _: f64, _: f64, _: &[f64]) -> Result<(), ObserverError> {
        Ok(())
    }
    fn record_mean(&mut self, _: f64, _: f64, _: &[f64]) -> Result<(), ObserverError> {
        Ok(())
    }
}

/// A reference case: name, config file, `--set`s.
const CASES: [(&str, &str, &[&str]); 5] = [
    (
        "ice-free",
        "classic-step-albedo.toml",
        &[
            "grid.bands=24",
            "time.years=30",
            "albedo.freeze_temperature_c=-200",
            "initial.temperature_p2_k=0",
        ],
    ),
    (
        "north1975",
        "north1975-exact.toml",
        &["grid.bands=24", "time.years=30", "initial.temperature_p2_k=-30"],
    ),
    (
        "budyko",
        "north1975-exact.toml",
        &[
            "grid.bands=24",
            "time.years=30",
            "initial.temperature_p2_k=-30",
            "transport.kind=\"relaxation\"",
            "transport.relaxation_rate=3.8",
        ],
    ),
    (
        "seasonal",
        "seasonal-globe.toml",
        &["grid.bands=15", "time.years=3"],
    ),
    // The same with annual means: the quadrature of every step's dense output (the explicit
    // schemes evaluate the rates at the step ends for their interpolant).
    (
        "seasonal-means",
        "seasonal-globe.toml",
        &["grid.bands=15", "time.years=3", "time.output=\"annual_mean\""],
    ),
];

/// The methods: name and `--set`s.
const METHODS: [(&str, &[&str]); 4] = [
    ("ros2-fixed", &["time.step_days=6"]),
    ("ros2", &[]),
    (
        "dopri5",
        &["time.method=\"dopri5\"", "time.stiffness_check=false"],
    ),
    (
        "dop853",
        &["time.method=\"dop853\"", "time.stiffness_check=false"],
    ),
];

/// Pinned counters per case and method: accepted steps, rejected steps, right-hand-side
/// evaluations, factorisations.
const PINNED: [(&str, &str, [u64; 4]); 20] = [
    ("ice-free", "ros2-fixed", [1827, 0, 3654, 2]),
    ("ice-free", "ros2", [118, 0, 236, 118]),
    ("ice-free", "dopri5", [787, 1, 4992, 0]),
    ("ice-free", "dop853", [417, 10, 5556, 0]),
    ("north1975", "ros2-fixed", [1827, 0, 3654, 1827]),
    ("north1975", "ros2", [39, 1, 79, 40]),
    ("north1975", "dopri5", [804, 5, 5118, 0]),
    ("north1975", "dop853", [416, 8, 5522, 0]),
    ("budyko", "ros2-fixed", [1827, 0, 3654, 4]),
    ("budyko", "ros2", [79, 2, 160, 81]),
    ("budyko", "dopri5", [60, 0, 450, 0]),
    ("budyko", "dop853", [61, 0, 822, 0]),
    ("seasonal", "ros2-fixed", [183, 0, 366, 183]),
    ("seasonal", "ros2", [362, 16, 740, 378]),
    ("seasonal", "dopri5", [72, 0, 540, 0]),
    ("seasonal", "dop853", [60, 0, 1532, 0]),
    ("seasonal-means", "ros2-fixed", [183, 0, 366, 183]),
    ("seasonal-means", "ros2", [362, 16, 740, 378]),
    ("seasonal-means", "dopri5", [28, 4, 232, 0]),
    ("seasonal-means", "dop853", [82, 0, 1254, 0]),
];

fn load(file: &str, sets: &[&str], method: &[&str]) -> Loaded {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs").join(file);
    // The seasonal config fixes its step; every other method chooses its own.
    let text = std::fs::read_to_string(&path)
        .unwrap()
        .replace("step_days = 6.0", "");
    let sets: Vec<String> = sets.iter().chain(method).map(|s| s.to_string()).collect();
    config::load_str(&text, file, Path::new("."), &sets).unwrap_or_else(|e| panic!("{file} {sets:?}: {e}"))
}

#[test]
fn every_method_on_every_reference_case_agrees_with_pinned_step_counts() {
    let mut table = Vec::new();
    for (case, file, sets) in CASES {
        let mut finals: Vec<(&str, f64)> = Vec::new();
        for (method, msets) in METHODS {
            let cfg = load(file, sets, msets);
            let model = Model::from_spec(&cfg.spec.model);
            let y0 = model.initial_state(&cfg.spec.initial);
            let s = driver::run(&model, &cfg.spec.time, &y0, &mut Nothing, &mut |_| {})
                .unwrap_or_else(|e| panic!("{case} {method}: {e}"));
            assert!(
                (s.t_end - cfg.spec.time.years).abs() < 1e-9,
                "{case} {method}: {}",
                s.t_end
            );
            let st = s.stats;
            table.push((
                case,
                method,
                [st.steps, st.rejected, st.rhs_evals, st.factorisations],
            ));
            let gmt = model.global_mean(&s.final_state);
            finals.push((method, gmt));
            if case == "ice-free" {
                // Exact (by hand, common practice): with no ice and linear OLR the global mean
                // obeys C dT/dt = <absorbed> - A - B T_C (transport conserves energy) from a
                // uniform start, so T_C = Teq + (T0 - Teq) exp(-B t / C).
                let mut ws = Workspace::new(model.len());
                let absorbed = model.grid.mean(&model.budget(0.0, &y0, &mut ws).absorbed);
                let (b, c, yr) = (2.09, 4.0e8, 365.25 * 86400.0);
                let teq = (absorbed - 203.3) / b;
                let t0 = model.global_mean(&y0) - 273.15;
                let want = teq + (t0 - teq) * (-b * yr * s.t_end / c).exp() + 273.15;
                // The local error tolerance is 0.01 K a step and the error decays with the
                // solution; a fixed 6-day step of a second-order scheme is far more accurate.
                assert!(
                    (gmt - want).abs() < 0.02,
                    "{case} {method}: {gmt} vs exact {want}"
                );
            }
        }
        // The methods agree with each other to a few local tolerances (0.01 K).
        let (lo, hi) = finals
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), (_, g)| {
                (a.min(*g), b.max(*g))
            });
        assert!(hi - lo < 0.05, "{case}: final global means {finals:?}");
    }
    let show: String = table
        .iter()
        .map(|(c, m, v)| format!("    (\"{c}\", \"{m}\", {v:?}),\n"))
        .collect();
    for ((case, method, got), (pc, pm, want)) in table.iter().zip(PINNED) {
        assert_eq!((*case, *method), (pc, pm));
        assert_eq!(
            *got, want,
            "{case} {method}: counters changed; if intended, the new table is:\n{show}"
        );
    }
}
