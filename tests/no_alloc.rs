//! The time-stepping hot loop allocates nothing (quality bar: no allocation in hot loops),
//! checked with a counting global allocator (common practice).

use icefold::config;
use icefold::integrate::rosenbrock::{Ros2, StepPolicy};
use icefold::model::Model;
use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;
use std::path::Path;
use std::sync::atomic::{AtomicU64, Ordering};

struct Counting;
static ALLOCS: AtomicU64 = AtomicU64::new(0);

thread_local! {
    /// Only the test's own thread is counted: the test harness's other threads may allocate
    /// at any moment (output capture, timers), which says nothing about the step loop.
    static COUNTED: Cell<bool> = const { Cell::new(false) };
}

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, l: Layout) -> *mut u8 {
        if COUNTED.with(|c| c.get()) {
            ALLOCS.fetch_add(1, Ordering::Relaxed);
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
        let before = ALLOCS.load(Ordering::Relaxed);
        for _ in 0..200 {
            r.step().unwrap();
        }
        assert_eq!(
            ALLOCS.load(Ordering::Relaxed) - before,
            0,
            "{sets:?}: allocations in 200 steps"
        );
    }
}
