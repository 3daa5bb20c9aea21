//! The time-stepping hot loop allocates nothing (quality bar: no allocation in hot loops),
//! checked with a counting global allocator (common practice).

use icefold::config;
use icefold::integrate::rosenbrock::{Ros2, StepPolicy};
use icefold::model::Model;
use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;
use std::path::Path;

struct Counting;

thread_local! {
    /// Only the test's own thread is counted: the test harness's other threads may allocate
    /// at any moment (output capture, timers), which says nothing about the step loop.
    static COUNTED: Cell<bool> = const { Cell::new(false) };
    /// Allocations of this thread while counted (per thread: tests run side by side).
    static ALLOCS: Cell<u64> = const { Cell::new(0) };
}

fn allocs() -> u64 {
    ALLOCS.with(|a| a.get())
}

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, l: Layout) -> *mut u8 {
        if COUNTED.with(|c| c.get()) {
            ALLOCS.with(|a| a.set(a.get() + 1));
        }
        unsafe { System.alloc(l) }
    }
    unsafe fn dealloc(&self, p: *mut u8, l: Layout) {
        unsafe { System.dealloc(p, l) }
    }
}

#[global_allocator]
static A: Counting = Counting;

#[test]
fn implicit_steps_do_not_allocate() {
    COUNTED.with(|c| c.set(true));
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/configs/classic-step-albedo.toml"
    ))
    .unwrap();
    for sets in [
        vec![],
        vec![
            "transport.kind=\"relaxation\"".to_string(),
            "albedo.kind=\"smooth\"".to_string(),
        ],
        // The step albedo's edge-balance rule (relaxation transport).
        vec!["transport.kind=\"relaxation\"".to_string()],
    ] {
        let cfg = config::load_str(&text, "t", Path::new("."), &sets).unwrap();
        let model = Model::from_spec(&cfg.spec.model);
        let y0 = model.initial_state(&cfg.spec.initial);
        let mut r = Ros2::new(
            &model,
            0.0,
            &y0,
            1e6,
            StepPolicy::Adaptive {
                tolerance: 1e-3,
                max_step: 10.0,
            },
            u64::MAX,
        );
        r.step().unwrap();
        let before = allocs();
        for _ in 0..200 {
            r.step().unwrap();
        }
        assert_eq!(allocs() - before, 0, "{sets:?}: allocations in 200 steps");
    }
}

#[test]
fn newton_iterations_do_not_allocate() {
    // Newton's method sets up its buffers once: two solves from starts that need different
    // numbers of iterations allocate the same number of times.
    use icefold::equilibrium::newton::{newton, NewtonOptions};
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/configs/classic-step-albedo.toml"
    ))
    .unwrap();
    let cfg = config::load_str(&text, "t", Path::new("."), &[]).unwrap();
    let model = Model::from_spec(&cfg.spec.model);
    let near = newton(
        &model,
        0.0,
        &model.initial_state(&cfg.spec.initial),
        NewtonOptions::default(),
    )
    .unwrap()
    .state;
    let far: Vec<f64> = near.iter().map(|t| t + 3.0).collect();
    let mut counts = Vec::new();
    for start in [&near, &far] {
        COUNTED.with(|c| c.set(true));
        let before = allocs();
        let res = newton(&model, 0.0, start, NewtonOptions::default()).unwrap();
        counts.push((res.iterations, allocs() - before));
        COUNTED.with(|c| c.set(false));
    }
    assert!(
        counts[1].0 > counts[0].0 + 1,
        "the far start should need more iterations: {counts:?}"
    );
    assert_eq!(
        counts[0].1, counts[1].1,
        "allocations grew with iterations: {counts:?}"
    );
}
