//! A model as a function of one control key (sweeps, continuation, regime maps).
//!
//! A key whose registry entry has an in-place change ([`Fast`]: insolation, CO2, additive
//! forcing, linear OLR, diffusivity) is applied to a built model directly, with a closed-form
//! `dG/dp`; any other control key is set on the validated model spec through its registry
//! setter and the model rebuilt from the spec (slower but exact; no TOML).

use crate::config::keys::{self, Fast};
use crate::config::{ConfigError, Loaded};
use crate::model::{Model, Sunlight};
use crate::physics::longwave::{co2_forcing, Longwave};
use crate::physics::transport::Transport;

/// Units of a control key's values, for output files (the registry's).
pub fn control_units(key: &str) -> &'static str {
    keys::units(key)
}

/// Whether the in-place change `f` applies to `model` (built with reference value `base`):
/// the insolation fixed in time, the OLR linear, the transport diffusive; the scaled
/// quantities nonzero at the reference.
fn fast_applies(f: Fast, model: &Model, base: f64) -> bool {
    match f {
        Fast::SolarConstant => matches!(model.sunlight, Sunlight::Fixed(_)) && base > 0.0,
        Fast::LinearA | Fast::LinearB => matches!(model.longwave, Longwave::Linear { .. }),
        Fast::Diffusivity => matches!(model.transport, Transport::Diffusive { .. }) && base > 0.0,
        Fast::Co2 | Fast::ConstantForcing | Fast::SolarScale => true,
    }
}

/// The model family `p -> Model` for one control key.
#[derive(Debug, Clone)]
pub struct Controlled {
    /// The loaded config (its value of the key is the reference).
    pub base: Loaded,
    /// The dotted key.
    pub key: String,
    base_model: Model,
    base_value: f64,
    fast: Option<Fast>,
    /// The family runs in q = ln(p) (log spacing): `model_at(q)` is the model at p = exp(q).
    log: bool,
}

impl Controlled {
    /// Set up for `key`; fails if the key is not numeric in the resolved config.
    pub fn new(base: &Loaded, key: &str) -> Result<Controlled, ConfigError> {
        let base_value = base.number(key).ok_or_else(|| ConfigError::Key {
            path: base.source.clone(),
            key: key.to_string(),
            message: "not a numeric key of this configuration (is its section's kind using it?)".into(),
        })?;
        let Some(entry) = keys::get(key).filter(|k| k.set.is_some()) else {
            return Err(ConfigError::Key {
                path: base.source.clone(),
                key: key.to_string(),
                message: format!("cannot be a control; allowed: one of {}", keys::control_names()),
            });
        };
        let base_model = Model::from_spec(&base.spec.model);
        // A forcing history overrides the constant drivers: vary those through a rebuild.
        let fast = entry
            .fast
            .filter(|f| base_model.forcing.is_none() && fast_applies(*f, &base_model, base_value));
        Ok(Controlled {
            base: base.clone(),
            key: key.to_string(),
            base_model,
            base_value,
            fast,
            log: false,
        })
    }

    /// The same family in q = ln(p): `model_at(q)` is the model at `exp(q)` and
    /// `heating_derivative` is `dG/dq = p dG/dp`, so continuation and sweeps in q step evenly
    /// in the logarithm of the key (`spacing = "log"`). Map results back with [`Self::key_value`].
    pub fn in_log(mut self) -> Controlled {
        self.log = true;
        // The cache key of the base model: NaN when ln is undefined (the first set applies).
        self.base_value = if self.base_value > 0.0 {
            self.base_value.ln()
        } else {
            f64::NAN
        };
        self
    }

    /// Whether the family runs in ln of the key.
    pub fn is_log(&self) -> bool {
        self.log
    }

    /// The key's value at family value `q` (`exp(q)` in log, else `q`).
    pub fn key_value(&self, q: f64) -> f64 {
        if self.log {
            q.exp()
        } else {
            q
        }
    }

    /// The family value of key value `p` (`ln(p)` in log, else `p`).
    pub fn family_value(&self, p: f64) -> f64 {
        if self.log {
            p.ln()
        } else {
            p
        }
    }

    /// The reference value of the control.
    pub fn base_value(&self) -> f64 {
        self.base_value
    }

    /// The model at reference value.
    pub fn base_model(&self) -> &Model {
        &self.base_model
    }

    /// The model at control value `p`.
    pub fn model_at(&self, p: f64) -> Result<Model, ConfigError> {
        let mut m = self.base_model.clone();
        self.apply(&mut m, p)?;
        Ok(m)
    }

    /// Set `model` (built from this family) to control value `p` (in ln of the key when log).
    pub fn apply(&self, model: &mut Model, p: f64) -> Result<(), ConfigError> {
        let p = self.key_value(p);
        let b = &self.base_model;
        match self.fast {
            Some(Fast::SolarConstant) => {
                if let (Sunlight::Fixed(dst), Sunlight::Fixed(src)) = (&mut model.sunlight, &b.sunlight) {
                    let f = p / self.base_value;
                    for (d, s) in dst.iter_mut().zip(src) {
                        *d = s * f;
                    }
                }
            }
            Some(Fast::Co2) => {
                let (_, reference, k) = self.base.spec.model.co2;
                if p.is_nan() || p <= 0.0 {
                    return Err(self.range(p, "allowed: CO2 above 0 ppm"));
                }
                model.drivers.greenhouse_wm2 = co2_forcing(k, p, reference);
            }
            Some(Fast::ConstantForcing) => model.drivers.extra_wm2 = p,
            Some(Fast::SolarScale) => model.drivers.solar_scale = p,
            Some(Fast::LinearA) => {
                if let Longwave::Linear { a, .. } = &mut model.longwave {
                    *a = p;
                }
            }
            Some(Fast::LinearB) => {
                if let Longwave::Linear { b, .. } = &mut model.longwave {
                    *b = p;
                }
            }
            Some(Fast::Diffusivity) => {
                if let (Transport::Diffusive { face_k: dst, .. }, Transport::Diffusive { face_k: src, .. }) =
                    (&mut model.transport, &b.transport)
                {
                    let f = p / self.base_value;
                    for (d, s) in dst.iter_mut().zip(src) {
                        *d = s * f;
                    }
                }
            }
            None => *model = Model::from_spec(&self.base.model_with(&self.key, p)?),
        }
        Ok(())
    }

    /// Whether `heating_derivative` has a closed form for this key (otherwise callers take a
    /// finite difference through `apply`).
    pub fn has_analytic_derivative(&self) -> bool {
        self.fast.is_some()
    }

    /// `dG_i/dp` (W m-2 per control unit) at `temps` for a `model` set to control value `p`,
    /// into `out`, in closed form for the fast keys. Returns false (and leaves `out` as it was)
    /// for keys that rebuild the model.
    pub fn heating_derivative(&self, model: &Model, p: f64, temps: &[f64], out: &mut [f64]) -> bool {
        if self.log {
            // dG/dq = (dG/dp) dp/dq with p = exp(q), dp/dq = p.
            let p = p.exp();
            if !self.heating_derivative_in_key(model, p, temps, out) {
                return false;
            }
            out.iter_mut().for_each(|o| *o *= p);
            return true;
        }
        self.heating_derivative_in_key(model, p, temps, out)
    }

    /// `heating_derivative` per unit of the key itself.
    fn heating_derivative_in_key(&self, model: &Model, p: f64, temps: &[f64], out: &mut [f64]) -> bool {
        let b = &self.base_model;
        let n = temps.len();
        // The edge-balance albedo depends on the insolation and the OLR slope too: those
        // derivatives are left to the caller's finite difference.
        let through_albedo = matches!(
            self.fast,
            Some(Fast::SolarConstant | Fast::SolarScale | Fast::LinearB)
        );
        if through_albedo && model.uses_edge_balance() {
            return false;
        }
        match self.fast {
            None => return false,
            Some(Fast::SolarConstant) => {
                // G contains (p / p0) S0_i (1 - albedo_i) times the solar scale.
                if let Sunlight::Fixed(src) = &b.sunlight {
                    let f = model.drivers.solar_scale / self.base_value;
                    for i in 0..n {
                        out[i] = f * src[i] * (1.0 - model.albedo.band(temps, i).0);
                    }
                } else {
                    return false;
                }
            }
            Some(Fast::SolarScale) => {
                if let Sunlight::Fixed(s) = &model.sunlight {
                    for i in 0..n {
                        out[i] = s[i] * (1.0 - model.albedo.band(temps, i).0);
                    }
                } else {
                    return false;
                }
            }
            // The greenhouse term k ln(p / p_ref) is added to every band.
            Some(Fast::Co2) => {
                let (_, _, k) = self.base.spec.model.co2;
                out.iter_mut().for_each(|o| *o = k / p);
            }
            Some(Fast::ConstantForcing) => out.iter_mut().for_each(|o| *o = 1.0),
            Some(Fast::LinearA) => out.iter_mut().for_each(|o| *o = -1.0),
            Some(Fast::LinearB) => {
                for (o, t) in out.iter_mut().zip(temps) {
                    *o = -(t - crate::physics::longwave::ZERO_CELSIUS);
                }
            }
            // The convergence is linear in the diffusivity scale.
            Some(Fast::Diffusivity) => {
                b.transport.convergence(&b.grid, temps, out);
                out.iter_mut().for_each(|o| *o /= self.base_value);
            }
        }
        true
    }

    fn range(&self, p: f64, allowed: &str) -> ConfigError {
        ConfigError::Range {
            path: self.base.source.clone(),
            key: self.key.clone(),
            value: p.to_string(),
            allowed: allowed.to_string(),
        }
    }
}
