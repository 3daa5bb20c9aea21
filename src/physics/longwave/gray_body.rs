//! Gray-body OLR `eps sigma T^4` with an effective emissivity `eps`.
//!
//! When to use it: a radiative form that stays physical at any temperature (snowball and hot
//! states), with one parameter for the greenhouse effect.
//!
//! Reference: the Stefan-Boltzmann law, constant from CODATA 2018; the effective-emissivity
//! form is common practice.

use super::Longwave;
use super::STEFAN_BOLTZMANN;
use crate::registry::{Key, Kind, Range};

/// OLR (W m-2) and dOLR/dT (W m-2 K-1) at `t` (K) for emissivity `emissivity`.
#[inline(always)]
pub fn olr(emissivity: f64, t: f64) -> (f64, f64) {
    let t3 = t * t * t;
    (
        emissivity * STEFAN_BOLTZMANN * t3 * t,
        4.0 * emissivity * STEFAN_BOLTZMANN * t3,
    )
}

/// `longwave.kind = "gray_body"`: its key (a forcing channel) and form.
pub const KIND: Kind<Longwave> = Kind {
    name: "gray_body",
    keys: &[
        Key::number("longwave.emissivity", "1", 0.61, Range::AboveUpTo(0.0, 1.0))
            .label("Emissivity")
            .kinds(&["gray_body"])
            .varies()
            .set(|l, v| {
                if let Longwave::GrayBody { emissivity } = l {
                    *emissivity = v;
                }
                Ok(())
            }),
    ],
    build: |r| {
        Ok(Longwave::GrayBody {
            emissivity: r.num("longwave.emissivity")?,
        })
    },
};
