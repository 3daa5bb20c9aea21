//! Ensemble and seasonal benchmarks (issue 4, DESIGN section 7). Run with
//! `cargo bench --bench ensemble`.
//!
//! - `ensemble_1000x200/threads=1|2`: 1000 members x 200 years at 45 bands (Latin hypercube in
//!   the diffusivity and the OLR slope, configs/ensemble-lhs.toml without the per-member
//!   sensitivity), members only (`run_ensemble`), and the whole job with the file
//!   (`ensemble_to_file`); the 1-to-2-thread speed-up is the ratio of the two medians.
//! - `seasonal_30yr_globe_90`: configs/seasonal-globe.toml (30 years, globe, 90 bands, smooth
//!   albedo, seasonal insolation, monthly records) integrated without a file, and with it.
//! - `run_diagnostics_classic_90`: the doubled-CO2 equilibria of `equilibrium.sensitivity`.
//! - `seasonal_table`: one evaluation of the orbit table at 90 bands (a Kepler solve and the
//!   band interpolation) against the exact antiderivative at every band.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use icefold::config;
use icefold::grid::{Domain, Grid, Spacing};
use icefold::integrate::driver::{self, Observer};
use icefold::jobs::ensemble::{ensemble_to_file, run_ensemble, EnsembleOptions};
use icefold::model::Model;
use icefold::physics::insolation::{band_mean_shape_exact, SeasonalTable};
use std::hint::black_box;
use std::path::Path;

fn load(name: &str, sets: &[&str]) -> config::Loaded {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs").join(name);
    let sets: Vec<String> = sets.iter().map(|s| s.to_string()).collect();
    config::load(&path, &sets).unwrap()
}

fn ensemble(c: &mut Criterion) {
    let cfg = load(
        "ensemble-lhs.toml",
        &["ensemble.members=1000", "ensemble.sensitivity=false"],
    );
    let out = std::env::temp_dir().join(format!("icefold-bench-ensemble-{}.nc", std::process::id()));
    let mut g = c.benchmark_group("ensemble_1000x200_45bands");
    g.sample_size(10);
    for threads in [1usize, 2] {
        let opts = EnsembleOptions {
            threads: Some(threads),
            ..EnsembleOptions::default()
        };
        g.bench_with_input(BenchmarkId::new("members", threads), &threads, |b, _| {
            b.iter(|| black_box(run_ensemble(&cfg, opts).unwrap().count()))
        });
        g.bench_with_input(BenchmarkId::new("with_file", threads), &threads, |b, _| {
            b.iter(|| black_box(ensemble_to_file(&cfg, &out, "bench", opts).unwrap().members))
        });
    }
    g.finish();
    let _ = std::fs::remove_file(&out);
}

struct Discard;

impl Observer for Discard {
    fn record(&mut self, _t: f64, temps: &[f64]) -> Result<(), Box<dyn std::error::Error + Send + Sync>> {
        black_box(temps[0]);
        Ok(())
    }
}

fn seasonal(c: &mut Criterion) {
    let cfg = load("seasonal-globe.toml", &[]);
    let model = Model::from_spec(&cfg.spec.model);
    let y0 = model.initial_state(&cfg.spec.initial);
    let out = std::env::temp_dir().join(format!("icefold-bench-seasonal-{}.nc", std::process::id()));
    let mut g = c.benchmark_group("seasonal_30yr_globe_90");
    g.sample_size(20);
    g.bench_function("integrate", |b| {
        b.iter(|| {
            let s = driver::run(&model, &cfg.spec.time, &y0, &mut Discard, &mut |_| {}).unwrap();
            black_box(s.final_state[0])
        })
    });
    g.bench_function("build_model_and_table", |b| {
        b.iter(|| black_box(Model::from_spec(&cfg.spec.model).len()))
    });
    g.bench_function("run_to_file", |b| {
        b.iter(|| {
            black_box(
                icefold::jobs::run::run_to_file(&cfg, &out, "bench", false)
                    .unwrap()
                    .final_global_mean,
            )
        })
    });
    g.finish();
    let _ = std::fs::remove_file(&out);
    let grid = Grid::new(Domain::Globe, Spacing::EqualArea, 90);
    let table = SeasonalTable::new(&grid, 1361.0, 23.44_f64.to_radians(), 0.0167, 4.94);
    let mut sun = vec![0.0; 90];
    let mut g = c.benchmark_group("seasonal_table_90");
    let mut t = 0.0;
    g.bench_function("table", |b| {
        b.iter(|| {
            t += 0.0137;
            table.eval(black_box(t), &mut sun);
            black_box(sun[0])
        })
    });
    g.bench_function("exact_every_band", |b| {
        b.iter(|| {
            t += 0.0137;
            let at = table.orbit(black_box(t));
            for (i, s) in sun.iter_mut().enumerate() {
                *s = 1361.0
                    * at.distance_factor
                    * band_mean_shape_exact(grid.x_faces[i], grid.x_faces[i + 1], at.sin_delta);
            }
            black_box(sun[0])
        })
    });
    g.finish();
}

fn diagnostics(c: &mut Criterion) {
    // The doubled-CO2 sensitivity of `equilibrium.sensitivity = true` (4 equilibria), on the 90-band
    // step-albedo hemisphere.
    let cfg = load("classic-step-albedo.toml", &["equilibrium.sensitivity=true"]);
    let model = Model::from_spec(&cfg.spec.model);
    let y0 = model.initial_state(&cfg.spec.initial);
    c.bench_function("run_diagnostics_classic_90", |b| {
        b.iter(|| {
            black_box(icefold::jobs::diagnostics::run_attrs(&cfg, &model, &y0, &Default::default()).len())
        })
    });
}

/// Band-steps of one member at the base values (for the ensemble's arithmetic bound in
/// benches/summary.py): 200 years at 45 bands, the adaptive ROS2 scheme.
fn member_count() {
    let cfg = load("ensemble-lhs.toml", &[]);
    let model = Model::from_spec(&cfg.spec.model);
    let y0 = model.initial_state(&cfg.spec.initial);
    let mut integ = driver::integrator(&model, &cfg.spec.time, 0.0, &y0, cfg.spec.time.years);
    let mut out = vec![0.0; model.len()];
    integ.advance_to(cfg.spec.time.years, &mut out).unwrap();
    let st = integ.stats();
    let dir = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("target")
        .join("criterion");
    let _ = std::fs::create_dir_all(&dir);
    // The kernel rows (src/tally.rs) of the whole 1000-member job, on one thread.
    let cfg = load(
        "ensemble-lhs.toml",
        &["ensemble.members=1000", "ensemble.sensitivity=false"],
    );
    let before = icefold::tally::snapshot();
    let opts = EnsembleOptions {
        threads: Some(1),
        ..EnsembleOptions::default()
    };
    black_box(run_ensemble(&cfg, opts).unwrap().count());
    let mut body = vec![format!("  \"member_steps\": {}", st.steps + st.rejected)];
    for (name, rows) in icefold::tally::snapshot().since(&before).named() {
        body.push(format!("  \"ensemble.{name}\": {rows}"));
    }
    let _ = std::fs::write(
        dir.join("icefold-counts-ensemble.json"),
        format!("{{\n{}\n}}\n", body.join(",\n")),
    );
}

fn ensemble_counted(c: &mut Criterion) {
    member_count();
    ensemble(c);
}

criterion_group! {
    name = benches;
    config = Criterion::default()
        .sample_size(10)
        .warm_up_time(std::time::Duration::from_millis(300))
        .measurement_time(std::time::Duration::from_secs(2));
    targets = ensemble_counted, seasonal, diagnostics
}
criterion_main!(benches);
