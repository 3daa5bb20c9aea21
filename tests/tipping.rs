//! Tipping points: continuation, sweeps and stability against published results.

use icefold::config::{self, Loaded};
use icefold::equilibrium::branches::all_branches;
use icefold::equilibrium::continuation::ContinuationOptions;
use icefold::equilibrium::control::Controlled;
use std::path::Path;

fn load(sets: &[&str]) -> Loaded {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/configs/classic-step-albedo.toml"
    ))
    .unwrap();
    let sets: Vec<String> = sets.iter().map(|s| s.to_string()).collect();
    config::load_str(&text, "classic", Path::new("."), &sets).unwrap()
}

#[test]
fn explore_branches() {
    let cfg = load(&[]);
    let fam = Controlled::new(&cfg, "insolation.solar_constant").unwrap();
    let opts = ContinuationOptions {
        from: 1100.0,
        to: 1700.0,
        step: 0.01,
        max_step: 0.05,
        min_step: 1e-7,
        max_points: 3000,
        tolerance_wm2: 1e-9,
        fold_tolerance: 1e-6,
    };
    let t = std::time::Instant::now();
    let br = all_branches(&fam, opts).unwrap();
    eprintln!("elapsed {:?}", t.elapsed());
    let m = fam.base_model();
    for b in &br {
        eprintln!(
            "branch: {} points, folds {:?}",
            b.points.len(),
            b.folds
                .iter()
                .map(|f| (f.control / 4.0, m.ice_edges(&f.state).0))
                .collect::<Vec<_>>()
        );
        for p in b.points.iter().step_by(10) {
            eprintln!(
                "  Q {:.3} edge {:.3} Tm {:.2} lead {:.4} dpds {:.3}",
                p.control / 4.0,
                m.ice_edges(&p.state).0,
                m.global_mean(&p.state),
                p.leading,
                p.dpds
            );
        }
    }
}
