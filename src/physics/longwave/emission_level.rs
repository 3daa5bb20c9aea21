//! OLR `sigma (T - lapse_rate * emission_height)^4` from an emitting layer a fixed height above
//! the surface on a fixed lapse rate.
//!
//! When to use it: the greenhouse effect as a raised emission level (its height the control),
//! black body at the emitting layer.
//!
//! Reference: the Stefan-Boltzmann law, constant from CODATA 2018; the emission-level picture
//! of the greenhouse effect is common practice.

use super::Longwave;
use super::STEFAN_BOLTZMANN;
use crate::registry::{Key, Kind, Range};

/// OLR (W m-2) and dOLR/dT (W m-2 K-1) at surface temperature `t` (K) for a lapse rate in
/// K per km and an emission height in km.
#[inline(always)]
pub fn olr(lapse_rate: f64, height: f64, t: f64) -> (f64, f64) {
    let te = t - lapse_rate * height;
    let t3 = te * te * te;
    (STEFAN_BOLTZMANN * t3 * te, 4.0 * STEFAN_BOLTZMANN * t3)
}

/// `longwave.kind = "emission_level"`: its keys and form.
pub const KIND: Kind<Longwave> = Kind {
    name: "emission_level",
    keys: &[
        Key::number(
            "longwave.lapse_rate_k_per_km",
            "K km-1",
            6.5,
            Range::Closed(0.0, 15.0),
        )
        .label("Lapse rate (K km⁻¹)")
        .kinds(&["emission_level"])
        .set(|l, v| {
            if let Longwave::EmissionLevel { lapse_rate, .. } = l {
                *lapse_rate = v;
            }
            Ok(())
        }),
        Key::number("longwave.emission_height_km", "km", 5.0, Range::Closed(0.0, 30.0))
            .label("Emission height (km)")
            .kinds(&["emission_level"])
            .set(|l, v| {
                if let Longwave::EmissionLevel { height, .. } = l {
                    *height = v;
                }
                Ok(())
            }),
    ],
    build: |r| {
        Ok(Longwave::EmissionLevel {
            lapse_rate: r.num("longwave.lapse_rate_k_per_km")?,
            height: r.num("longwave.emission_height_km")?,
        })
    },
};

#[cfg(test)]
mod tests {
    use super::super::Longwave;
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn dry_adiabat_emission_level() {
        // Common practice: dry adiabatic lapse rate g/cp = 9.80665/1004 = 9.77 K/km ~ 9.8 K/km.
        let g_over_cp = 9.80665 / 1004.0 * 1000.0;
        assert_relative_eq!(g_over_cp, 9.8, epsilon = 0.05);
        let lw = Longwave::EmissionLevel {
            lapse_rate: 6.5,
            height: 5.0,
        };
        let (v, _) = lw.eval(288.0);
        assert_relative_eq!(v, STEFAN_BOLTZMANN * (288.0_f64 - 32.5).powi(4), epsilon = 1e-9);
    }
}
