//! Time-stepping and equilibrium benchmarks (DESIGN section 7). Run with `cargo bench`;
//! `make bench` prints one table of every figure with its arithmetic lower bound
//! (benches/summary.py; the operation counts are derived in DEVELOPERS.md).
//!
//! - `peak/*`: the machine's rate for this code's kind of arithmetic, measured: independent
//!   multiply-adds (the throughput bound) and one dependent chain (the latency bound).
//! - `band_step/*`: nanoseconds per band-step (throughput = bands x steps) of the implicit ROS2
//!   scheme with a fixed one-day step (ice free, and with an ice edge moving through bands), the
//!   adaptive ROS2 scheme from an ice-capped start, and Dopri5 / Dop853 over a short span, at
//!   45, 90, 180 and 360 bands.
//! - `workload/*`: a 1000-year 90-band run to equilibrium, Newton's equilibrium at 90 bands,
//!   the 121-step two-way sweep with settling, and the full continuation curve.
//!
//! Step counts needed for the bounds of whole workloads are written to
//! `target/criterion/icefold-counts.json`.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion, Throughput};
use icefold::config;
use icefold::equilibrium::newton::{newton, NewtonOptions};
use icefold::integrate::driver;
use icefold::integrate::explicit::{Explicit, Scheme};
use icefold::integrate::rosenbrock::{Ros2, StepPolicy};
use icefold::integrate::Integrator;
use icefold::model::Model;
use std::collections::BTreeMap;
use std::hint::black_box;
use std::path::Path;
use std::sync::Mutex;

/// Counts (band-steps per iteration etc.) for benches/summary.py.
static COUNTS: Mutex<BTreeMap<String, f64>> = Mutex::new(BTreeMap::new());

fn count(key: &str, v: f64) {
    COUNTS.lock().unwrap().insert(key.to_string(), v);
    let dir = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("target")
        .join("criterion");
    let _ = std::fs::create_dir_all(&dir);
    let body: Vec<String> = COUNTS
        .lock()
        .unwrap()
        .iter()
        .map(|(k, v)| format!("  \"{k}\": {v}"))
        .collect();
    let _ = std::fs::write(
        dir.join("icefold-counts.json"),
        format!("{{\n{}\n}}\n", body.join(",\n")),
    );
}

fn load(name: &str, sets: &[String]) -> config::Loaded {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs").join(name);
    config::load(&path, sets).unwrap()
}

fn peak(c: &mut Criterion) {
    // 8 x 512 independent multiply-add updates per iteration (vectorisable), and one chain of
    // 4096 dependent ones: 2 flops each.
    let mut g = c.benchmark_group("peak");
    g.throughput(Throughput::Elements(2 * 4096));
    let mut x = vec![1.0_f64; 4096];
    g.bench_function("independent_mul_add", |b| {
        b.iter(|| {
            let (a, s) = (black_box(0.999_999), black_box(1e-7));
            for v in x.iter_mut() {
                *v = *v * a + s;
            }
            black_box(x[17])
        })
    });
    // The same two kernels compiled for AVX2 and FMA (what the implicit step runs on such a
    // CPU, src/cpu.rs): four lanes per instruction, a multiply-add in one instruction.
    #[cfg(target_arch = "x86_64")]
    if icefold::cpu::wide_fma() {
        g.bench_function("independent_fma_wide", |b| {
            b.iter(|| {
                // SAFETY: the CPU has AVX2 and FMA (checked just above).
                unsafe { wide::independent(&mut x, black_box(0.999_999), black_box(1e-7)) };
                black_box(x[17])
            })
        });
        g.bench_function("dependent_fma_wide", |b| {
            b.iter(|| {
                // SAFETY: as above.
                black_box(unsafe { wide::dependent(black_box(1.0), black_box(0.999_999), black_box(1e-7)) })
            })
        });
    }
    g.bench_function("dependent_mul_add", |b| {
        b.iter(|| {
            let (a, s) = (black_box(0.999_999), black_box(1e-7));
            let mut v = black_box(1.0_f64);
            for _ in 0..4096 {
                v = v * a + s;
            }
            black_box(v)
        })
    });
    g.finish();
}

#[cfg(target_arch = "x86_64")]
mod wide {
    /// `x = x a + s` over `x`, fused, vectorised by the compiler.
    #[target_feature(enable = "avx2,fma")]
    pub unsafe fn independent(x: &mut [f64], a: f64, s: f64) {
        for v in x.iter_mut() {
            *v = v.mul_add(a, s);
        }
    }

    /// One chain of 4096 fused multiply-adds.
    #[target_feature(enable = "avx2,fma")]
    pub unsafe fn dependent(mut v: f64, a: f64, s: f64) -> f64 {
        for _ in 0..4096 {
            v = v.mul_add(a, s);
        }
        v
    }
}

/// Record the kernel rows (src/tally.rs) one call of `f` does, under `key`, for the bounds of
/// whole workloads.
fn tally<T>(key: &str, f: impl FnOnce() -> T) -> T {
    let before = icefold::tally::snapshot();
    let out = f();
    for (name, rows) in icefold::tally::snapshot().since(&before).named() {
        count(&format!("{key}.{name}"), rows as f64);
    }
    out
}

fn per_band_step(c: &mut Criterion) {
    let mut g = c.benchmark_group("band_step");
    for bands in [45usize, 90, 180, 360] {
        let b_set = format!("grid.bands={bands}");
        // Ice free: uniform 15 C start (settles ice free); ice edge: the config's ice-capped
        // start (P2 of -30 K), where the edge moves through bands and the albedo couples them.
        let free = load(
            "classic-step-albedo.toml",
            &[
                b_set.clone(),
                "initial.temperature_p2_k=0".into(),
                "initial.temperature_c=15".into(),
            ],
        );
        let edge = load("classic-step-albedo.toml", std::slice::from_ref(&b_set));
        let steps = 1000u64;
        for (name, cfg) in [
            ("implicit_fixed_ice_free", &free),
            ("implicit_fixed_ice_edge", &edge),
        ] {
            let model = Model::from_spec(&cfg.spec.model);
            let y0 = model.initial_state(&cfg.spec.initial);
            g.throughput(Throughput::Elements(steps * bands as u64));
            g.bench_with_input(BenchmarkId::new(name, bands), &bands, |b, _| {
                b.iter(|| {
                    let mut r = Ros2::new(&model, 0.0, &y0, 1e9, StepPolicy::Fixed(1.0 / 365.25), u64::MAX);
                    for _ in 0..steps {
                        r.step().unwrap();
                    }
                    black_box(r.state()[0])
                })
            });
        }
        // Adaptive, tolerance 0.01 K, from the ice-capped start for 200 years.
        let model = Model::from_spec(&edge.spec.model);
        let y0 = model.initial_state(&edge.spec.initial);
        let policy = StepPolicy::Adaptive {
            tolerance: 0.01,
            max_step: 10.0,
        };
        let mut r = Ros2::new(&model, 0.0, &y0, 200.0, policy, u64::MAX);
        let mut out = vec![0.0; bands];
        r.advance_to(200.0, &mut out).unwrap();
        let st = r.stats();
        let work = (st.steps + st.rejected) * bands as u64;
        count(
            &format!("adaptive_steps_{bands}"),
            (st.steps + st.rejected) as f64,
        );
        g.throughput(Throughput::Elements(work));
        g.bench_with_input(
            BenchmarkId::new("implicit_adaptive_200yr", bands),
            &bands,
            |b, _| {
                b.iter(|| {
                    let mut r = Ros2::new(&model, 0.0, &y0, 200.0, policy, u64::MAX);
                    r.advance_to(200.0, &mut out).unwrap();
                    black_box(out[0])
                })
            },
        );
        // Explicit schemes over a short span (stiff: the step is set by the fastest transport
        // mode, ~1/bands^2), per accepted step.
        let model = Model::from_spec(&free.spec.model);
        let y0 = model.initial_state(&free.spec.initial);
        let span = 0.2 * (45.0 / bands as f64).powi(2);
        for (name, scheme) in [("dopri5", Scheme::Dopri5), ("dop853", Scheme::Dop853)] {
            let mut e = Explicit::new(&model, scheme, 0.0, &y0, 1e-3, 1.0, false, u64::MAX);
            e.advance_to(span, &mut out).unwrap();
            let s = e.stats();
            count(&format!("{name}_steps_{bands}"), (s.steps + s.rejected) as f64);
            count(&format!("{name}_evals_{bands}"), s.rhs_evals as f64);
            g.throughput(Throughput::Elements((s.steps + s.rejected) * bands as u64));
            g.bench_with_input(BenchmarkId::new(name, bands), &bands, |b, _| {
                b.iter(|| {
                    let mut e = Explicit::new(&model, scheme, 0.0, &y0, 1e-3, 1.0, false, u64::MAX);
                    e.advance_to(span, &mut out).unwrap();
                    black_box(out[0])
                })
            });
        }
    }
    g.finish();
}

fn workloads(c: &mut Criterion) {
    let mut g = c.benchmark_group("workload");
    g.sample_size(10);
    // 1000 years at 90 bands from a uniform 15 C start, the config's tolerance (0.01 K).
    let cfg = load(
        "classic-step-albedo.toml",
        &[
            "initial.temperature_p2_k=0".into(),
            "initial.temperature_c=15".into(),
            "time.years=1000".into(),
        ],
    );
    let model = Model::from_spec(&cfg.spec.model);
    let y0 = model.initial_state(&cfg.spec.initial);
    let mut out = vec![0.0; model.len()];
    let mut integ = driver::integrator(&model, &cfg.spec.time, 0.0, &y0, 1000.0);
    tally("run_1000yr", || integ.advance_to(1000.0, &mut out).unwrap());
    let st = integ.stats();
    count("run_1000yr_steps", (st.steps + st.rejected) as f64);
    g.bench_function("run_1000yr_90bands", |b| {
        b.iter(|| {
            let mut integ = driver::integrator(&model, &cfg.spec.time, 0.0, &y0, 1000.0);
            integ.advance_to(1000.0, &mut out).unwrap();
            black_box(out[0])
        })
    });
    // Newton's method to the ice-capped equilibrium from the config's start (90 bands).
    let cfg = load("classic-step-albedo.toml", &[]);
    let model = Model::from_spec(&cfg.spec.model);
    let y0 = model.initial_state(&cfg.spec.initial);
    let res = tally("newton", || {
        newton(&model, 0.0, &y0, NewtonOptions::default()).unwrap()
    });
    count("newton_iterations", res.iterations as f64);
    g.bench_function("newton_90bands", |b| {
        b.iter(|| {
            black_box(
                newton(&model, 0.0, &y0, NewtonOptions::default())
                    .unwrap()
                    .residual_wm2,
            )
        })
    });
    // Two-way sweep: 121 values of S0 each way, settled, tipping points refined.
    let cfg = load("sweep-solar.toml", &[]);
    tally("sweep", || icefold::jobs::sweep::run_sweep(&cfg).unwrap());
    g.bench_function("sweep_121x2_90bands", |b| {
        b.iter(|| black_box(icefold::jobs::sweep::run_sweep(&cfg).unwrap().tipping.len()))
    });
    // Full continuation curve (every branch, folds located).
    let cfg = load("branches-solar.toml", &[]);
    let set = tally("continuation", || {
        icefold::jobs::branches::run_branches(&cfg).unwrap()
    });
    let points: usize = set.branches.iter().map(|b| b.points.len()).sum();
    count("continuation_points", points as f64);
    count("continuation_linearisations", set.linearisations as f64);
    g.bench_function("continuation_90bands", |b| {
        b.iter(|| {
            black_box(
                icefold::jobs::branches::run_branches(&cfg)
                    .unwrap()
                    .linearisations,
            )
        })
    });
    // The regime map of configs/regimes-classic.toml (21 x 141 cells, each a continuation in
    // the second control), rows spread over 1 and 2 threads; counted on one thread (the same
    // work on any number).
    let cfg = load("regimes-classic.toml", &[]);
    let one = icefold::jobs::regimes::RegimesOptions { threads: Some(1) };
    tally("regimes", || {
        icefold::jobs::regimes::run_regimes(&cfg, one).unwrap()
    });
    for threads in [1usize, 2] {
        let opts = icefold::jobs::regimes::RegimesOptions {
            threads: Some(threads),
        };
        g.bench_with_input(BenchmarkId::new("regimes_21x141", threads), &threads, |b, _| {
            b.iter(|| black_box(icefold::jobs::regimes::run_regimes(&cfg, opts).unwrap()))
        });
    }
    g.finish();
}

criterion_group! {
    name = benches;
    config = Criterion::default()
        .sample_size(15)
        .warm_up_time(std::time::Duration::from_millis(300))
        .measurement_time(std::time::Duration::from_millis(1200));
    targets = peak, per_band_step, workloads
}
criterion_main!(benches);
