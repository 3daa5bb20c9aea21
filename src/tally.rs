//! A process-wide count of the rows each numerical kernel has processed, so that any workload
//! (a run, a sweep, a continuation, a regime map on worker threads) can be given an arithmetic
//! lower bound: rows of each kernel times its floating-point operations per row
//! (DEVELOPERS.md, "Performance"), over the machine's peak rate. The benchmarks read it; the
//! solvers only add to it, once per kernel call (never per row), each thread to its own
//! counters (a plain load and store, no contention), which a snapshot sums.

use std::sync::atomic::{AtomicU64, Ordering::Relaxed};
use std::sync::{Arc, Mutex};

/// The counted kernels.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kernel {
    /// Net heating `G`, per band.
    Heating,
    /// Heating with its Jacobian in one pass, per band.
    HeatingJacobian,
    /// Jacobian alone, per band.
    Jacobian,
    /// Rows of a tridiagonal matrix built and factorised.
    FactorRow,
    /// Rows of a tridiagonal solve (both sweeps).
    SolveRow,
    /// Band-steps of the ROS2 scheme's own vector arithmetic (stage point, right-hand sides,
    /// update, scaling, error norm), besides its heating and solves.
    Ros2Row,
    /// Rows of a Sturm count (eigenvalue bisection).
    SturmRow,
    /// Rows of a determinant-ratio sweep (eigenvalue Newton step).
    RatioRow,
}

const KINDS: usize = 8;

type Counters = [AtomicU64; KINDS];

/// Every thread's counters (kept after the thread ends, so its work still counts).
static ALL: Mutex<Vec<Arc<Counters>>> = Mutex::new(Vec::new());

thread_local! {
    static MINE: Arc<Counters> = {
        let c: Arc<Counters> = Arc::new(std::array::from_fn(|_| AtomicU64::new(0)));
        ALL.lock().unwrap_or_else(|e| e.into_inner()).push(c.clone());
        c
    };
}

/// Add `rows` rows of `kernel` to the count.
#[inline(always)]
pub fn add(kernel: Kernel, rows: usize) {
    MINE.with(|m| {
        let c = &m[kernel as usize];
        c.store(c.load(Relaxed).wrapping_add(rows as u64), Relaxed);
    });
}

/// The counts so far over every thread, in the order of [`Kernel`].
pub fn snapshot() -> Tally {
    let all = ALL.lock().unwrap_or_else(|e| e.into_inner());
    Tally(std::array::from_fn(|i| {
        all.iter().fold(0u64, |s, c| s.wrapping_add(c[i].load(Relaxed)))
    }))
}

/// This thread's counts so far.
pub fn this_thread() -> Tally {
    MINE.with(|m| Tally(std::array::from_fn(|i| m[i].load(Relaxed))))
}

/// Counts by kernel.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct Tally(pub [u64; KINDS]);

impl Tally {
    /// Rows of one kernel.
    pub fn rows(&self, k: Kernel) -> u64 {
        self.0[k as usize]
    }

    /// The counts since an earlier snapshot.
    pub fn since(&self, earlier: &Tally) -> Tally {
        Tally(std::array::from_fn(|i| self.0[i].wrapping_sub(earlier.0[i])))
    }

    /// The kernels and their rows, with stable names (for the benchmarks' JSON).
    pub fn named(&self) -> [(&'static str, u64); KINDS] {
        Kernel::ALL.map(|k| (k.name(), self.rows(k)))
    }
}

impl Kernel {
    /// Every kernel, in counter order.
    pub const ALL: [Kernel; KINDS] = [
        Kernel::Heating,
        Kernel::HeatingJacobian,
        Kernel::Jacobian,
        Kernel::FactorRow,
        Kernel::SolveRow,
        Kernel::Ros2Row,
        Kernel::SturmRow,
        Kernel::RatioRow,
    ];

    /// Stable name (benches/summary.py reads these).
    pub fn name(self) -> &'static str {
        match self {
            Kernel::Heating => "heating",
            Kernel::HeatingJacobian => "heating_jacobian",
            Kernel::Jacobian => "jacobian",
            Kernel::FactorRow => "factor_row",
            Kernel::SolveRow => "solve_row",
            Kernel::Ros2Row => "ros2_row",
            Kernel::SturmRow => "sturm_row",
            Kernel::RatioRow => "ratio_row",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn counts_add_over_threads() {
        // Tests run in parallel and may count too: this thread's own delta is exact, the
        // process-wide one at least as large.
        let (before, mine) = (snapshot(), this_thread());
        add(Kernel::RatioRow, 90);
        add(Kernel::RatioRow, 10);
        let worker = std::thread::spawn(|| {
            let b = this_thread();
            add(Kernel::RatioRow, 5);
            this_thread().since(&b)
        });
        assert_eq!(worker.join().unwrap().rows(Kernel::RatioRow), 5);
        assert_eq!(this_thread().since(&mine).rows(Kernel::RatioRow), 100);
        assert!(snapshot().since(&before).rows(Kernel::RatioRow) >= 105);
    }
}
