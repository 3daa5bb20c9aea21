//! Time-stepping benchmarks (DESIGN section 7): nanoseconds per band-step of each scheme, and a
//! 1000-year 90-band run from a uniform 15 C start to equilibrium. Run with `cargo bench`.
//!
//! Arithmetic lower bound per band-step of the implicit scheme (ROS2, see DEVELOPERS.md):
//! two right-hand sides (~25 flops per band each: albedo, OLR, transport), one Jacobian
//! (~20), one tridiagonal factorisation (~8) and two solves (~10 each), about 100 flops per
//! band-step; at a sustained 2-4 Gflop/s for this dependent scalar code that is 25-50 ns.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use icefold::config;
use icefold::integrate::driver;
use icefold::integrate::explicit::{Explicit, Scheme};
use icefold::integrate::rosenbrock::{Ros2, StepPolicy};
use icefold::integrate::Integrator;
use icefold::model::Model;
use std::hint::black_box;
use std::path::Path;

fn classic(sets: &[String]) -> config::Loaded {
    let text = include_str!("../configs/classic-step-albedo.toml");
    config::load_str(text, "classic", Path::new("."), sets).unwrap()
}

fn per_band_step(c: &mut Criterion) {
    let mut g = c.benchmark_group("band_step");
    for bands in [45usize, 90, 180, 360] {
        let cfg = classic(&[
            format!("grid.bands={bands}"),
            "initial.temperature_p2_k=0".into(),
            "initial.temperature_c=15".into(),
        ]);
        let model = Model::from_spec(&cfg.spec.model);
        let y0 = model.initial_state(&cfg.spec.initial);
        let steps = 1000u64;
        g.throughput(Throughput::Elements(steps * bands as u64));
        g.bench_with_input(BenchmarkId::new("implicit_fixed_1day", bands), &bands, |b, _| {
            b.iter(|| {
                let mut r = Ros2::new(&model, 0.0, &y0, 1e9, StepPolicy::Fixed(1.0 / 365.25), u64::MAX);
                for _ in 0..steps {
                    r.step().unwrap();
                }
                black_box(r.state()[0])
            })
        });
        if bands <= 90 {
            // Explicit schemes: 2 model years (stiff: thousands of steps); per band-step from the
            // reported step counts printed once.
            for (name, scheme) in [("dopri5", Scheme::Dopri5), ("dop853", Scheme::Dop853)] {
                let mut e = Explicit::new(&model, scheme, 0.0, &y0, 1e-3, 1.0, false, u64::MAX);
                let mut out = vec![0.0; bands];
                e.advance_to(0.05, &mut out).unwrap();
                let s = e.stats();
                eprintln!(
                    "{name} at {bands} bands: {} steps, {} evaluations per 0.05 model years",
                    s.steps, s.rhs_evals
                );
                g.throughput(Throughput::Elements(s.steps * bands as u64));
                g.bench_with_input(
                    BenchmarkId::new(format!("{name}_0.05yr"), bands),
                    &bands,
                    |b, _| {
                        b.iter(|| {
                            let mut e = Explicit::new(&model, scheme, 0.0, &y0, 1e-3, 1.0, false, u64::MAX);
                            e.advance_to(0.05, &mut out).unwrap();
                            black_box(out[0])
                        })
                    },
                );
            }
        }
    }
    g.finish();
}

fn thousand_years(c: &mut Criterion) {
    let cfg = classic(&[
        "initial.temperature_p2_k=0".into(),
        "initial.temperature_c=15".into(),
        "time.years=1000".into(),
    ]);
    let model = Model::from_spec(&cfg.spec.model);
    let y0 = model.initial_state(&cfg.spec.initial);
    let mut integ = driver::integrator(&model, &cfg.spec.time, 0.0, &y0, 1000.0);
    let mut out = vec![0.0; model.len()];
    integ.advance_to(1000.0, &mut out).unwrap();
    eprintln!(
        "1000-year run, tolerance {} K: {:?}",
        cfg.spec.time.tolerance,
        integ.stats()
    );
    c.bench_function("run_1000yr_90bands_to_equilibrium", |b| {
        b.iter(|| {
            let mut integ = driver::integrator(&model, &cfg.spec.time, 0.0, &y0, 1000.0);
            integ.advance_to(1000.0, &mut out).unwrap();
            black_box(out[0])
        })
    });
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(20).measurement_time(std::time::Duration::from_secs(3));
    targets = per_band_step, thousand_years
}
criterion_main!(benches);
