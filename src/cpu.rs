//! What the CPU offers beyond the baseline target, found once at run time.
//!
//! The default x86-64 target has SSE2 only: two doubles per vector instruction and no fused
//! multiply-add, so `f64::mul_add` becomes a library call. The time-stepping kernels are compiled
//! twice, once for the baseline and once with AVX2 and FMA enabled, and [`wide_fma`] picks one
//! when an integrator is built. Both copies compute the same bits: Rust never fuses a multiply
//! and an add on its own (no floating-point contraction), vector lanes round exactly as scalar
//! code does, sums keep their order, and `mul_add` is exactly rounded on either path.

/// True when the CPU runs AVX2 and FMA instructions (always false off x86-64). Setting the
/// environment variable `ICEFOLD_BASELINE_CPU` (to anything) forces the baseline copy, for
/// tests that compare the two.
pub fn wide_fma() -> bool {
    #[cfg(target_arch = "x86_64")]
    {
        use std::sync::OnceLock;
        static WIDE: OnceLock<bool> = OnceLock::new();
        *WIDE.get_or_init(|| {
            std::env::var_os("ICEFOLD_BASELINE_CPU").is_none()
                && std::arch::is_x86_feature_detected!("avx2")
                && std::arch::is_x86_feature_detected!("fma")
        })
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        false
    }
}
