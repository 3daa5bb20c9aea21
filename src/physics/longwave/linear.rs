//! Linear OLR `A + B (T - 273.15 K)`.
//!
//! When to use it: the classic fitted form, cheapest and exactly linear, so equilibria and
//! folds come out in closed form to compare against; trust it only over the temperatures its
//! `A`, `B` were fitted to.
//!
//! Reference: Budyko (1969, Tellus 21, 611-619).

use super::Longwave;
use super::ZERO_CELSIUS;
use crate::registry::{Fast, Key, Kind, Range};

/// OLR (W m-2) and dOLR/dT (W m-2 K-1) at `t` (K) for `a` (W m-2, OLR at 0 C) and `b`
/// (W m-2 K-1).
#[inline(always)]
pub fn olr(a: f64, b: f64, t: f64) -> (f64, f64) {
    (a + b * (t - ZERO_CELSIUS), b)
}

/// `longwave.kind = "linear"`: its keys (each a forcing channel and a fast control) and form.
pub const KIND: Kind<Longwave> = Kind {
    name: "linear",
    keys: &[
        Key::number("longwave.a", "W m-2", 203.3, Range::Any)
            .label("OLR at 0 °C, A (W m⁻²)")
            .kinds(&["linear"])
            .varies()
            .set(|l, v| {
                if let Longwave::Linear { a, .. } = l {
                    *a = v;
                }
                Ok(())
            })
            .fast(Fast::LinearA),
        Key::number("longwave.b", "W m-2 K-1", 2.09, Range::Above(0.0))
            .label("OLR slope B (W m⁻² K⁻¹)")
            .kinds(&["linear"])
            .varies()
            .set(|l, v| {
                if let Longwave::Linear { b, .. } = l {
                    *b = v;
                }
                Ok(())
            })
            .fast(Fast::LinearB),
    ],
    build: |r| {
        Ok(Longwave::Linear {
            a: r.num("longwave.a")?,
            b: r.num("longwave.b")?,
        })
    },
};
