//! OLR `(1 - eps/2) sigma T^4` of a surface under one gray atmospheric layer of longwave
//! emissivity (absorptivity) `eps` in radiative equilibrium: the layer absorbs `eps sigma T^4`
//! and emits `eps sigma T_a^4` up and down, so `2 eps sigma T_a^4 = eps sigma T^4` and the top
//! of the atmosphere sees `(1 - eps) sigma T^4 + eps sigma T_a^4`.
//!
//! When to use it: a greenhouse effect with a physical parameter (the layer's absorptivity,
//! 0 for no atmosphere, 1 for an opaque layer) instead of an effective emissivity; the first
//! step towards a radiative column.
//!
//! Reference: the single-layer ("leaky greenhouse") gray atmosphere is common textbook
//! practice; the Stefan-Boltzmann constant from CODATA 2018.

use super::{Longwave, STEFAN_BOLTZMANN};
use crate::registry::{Key, Kind, Range};

/// OLR (W m-2) and dOLR/dT (W m-2 K-1) at surface temperature `t` (K) under a layer of
/// emissivity `eps`.
#[inline(always)]
pub fn olr(eps: f64, t: f64) -> (f64, f64) {
    let f = (1.0 - 0.5 * eps) * STEFAN_BOLTZMANN;
    let t3 = t * t * t;
    (f * t3 * t, 4.0 * f * t3)
}

/// `longwave.kind = "gray_layer"`: its key and form.
pub const KIND: Kind<Longwave> = Kind {
    name: "gray_layer",
    keys: &[
        Key::number("longwave.layer_emissivity", "1", 0.78, Range::Closed(0.0, 1.0))
            .label("Layer emissivity")
            .kinds(&["gray_layer"])
            .set(|l, v| {
                if let Longwave::GrayLayer { eps } = l {
                    *eps = v;
                }
                Ok(())
            }),
    ],
    build: |r| {
        Ok(Longwave::GrayLayer {
            eps: r.num("longwave.layer_emissivity")?,
        })
    },
};

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn olr_is_the_closed_form_of_one_gray_layer() {
        // Closed form (common practice): the layer at T_a = T / 2^(1/4) and the surface.
        for (eps, t) in [(0.0, 255.0_f64), (0.5, 288.0), (0.78, 288.0), (1.0, 300.0)] {
            let ta4 = t.powi(4) / 2.0;
            let top = (1.0 - eps) * STEFAN_BOLTZMANN * t.powi(4) + eps * STEFAN_BOLTZMANN * ta4;
            let (o, d) = olr(eps, t);
            assert_relative_eq!(o, top, max_relative = 1e-14);
            // Central difference, step 1e-3 K: truncation ~1e-7 relative.
            let fd = (olr(eps, t + 1e-3).0 - olr(eps, t - 1e-3).0) / 2e-3;
            assert_relative_eq!(d, fd, max_relative = 1e-8);
        }
    }
}
