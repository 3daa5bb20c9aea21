//! The assembled model Jacobian `dG_i/dT_j` (issue 12): for every albedo form x OLR form x
//! transport x domain, at a state with an ice edge inside the grid (edge bands) and at one
//! without, against central finite differences of the heating; and the fused
//! heating-with-Jacobian pass against the plain passes bit for bit. The AVX2/FMA copy of the
//! time-stepping kernel (`Ros2::step_wide`, which inlines the fused pass) is compared with the
//! baseline copy over the same grid of forms, through the binary, file values bit for bit.

mod common_cli;

use common_cli::{tempdir, BIN};
use icefold::config::{load_str, Loaded};
use icefold::linalg::Tridiag;
use icefold::model::{Model, Sunlight, Workspace};
use icefold::output::NcReader;
use std::path::Path;
use std::process::Command;

const ALBEDO: &[&str] = &["step", "smooth", "ramp"];
const OLR: &[&str] = &["linear", "gray_body", "emission_level", "table"];
const TRANSPORT: &[&str] = &["diffusive", "relaxation"];
const DOMAIN: &[&str] = &["hemisphere", "globe"];

/// An OLR table (K, W m-2) with kinks at its rows, far from the test states' temperatures.
const TABLE: &str = "temperature_k,olr_wm2\n150,90\n225.5,160\n310.5,270\n400,420\n";

/// Config text of one combination, `bands` bands.
fn config_text(albedo: &str, olr: &str, transport: &str, domain: &str, bands: usize) -> String {
    let table = if olr == "table" {
        "table = \"olr.csv\"\n"
    } else {
        ""
    };
    format!(
        "[grid]\nbands = {bands}\ndomain = \"{domain}\"\n[albedo]\nkind = \"{albedo}\"\n\
         [longwave]\nkind = \"{olr}\"\n{table}[transport]\nkind = \"{transport}\"\n"
    )
}

fn load(dir: &Path, text: &str) -> Loaded {
    load_str(text, "jacobian.toml", dir, &[]).unwrap_or_else(|e| panic!("{e}\n{text}"))
}

/// Temperatures `t_eq - drop x^2` at the band centres, K; with `drop` = 60 the freezing point
/// (263.15 K) falls between bands (an edge band on each side of it), with 20 the state is ice
/// free. Shifted by a fraction of a kelvin until every band is at least 0.05 K away from the
/// freezing point, so that no finite-difference step moves a band across it.
fn state(model: &Model, drop: f64) -> Vec<f64> {
    let tf = 263.15;
    let mut shift = 0.0;
    loop {
        let t: Vec<f64> = model
            .grid
            .x_centres
            .iter()
            .map(|x| 300.0 + shift - drop * x * x)
            .collect();
        if t.iter().all(|v| (v - tf).abs() > 0.05) {
            return t;
        }
        shift += 0.137;
    }
}

/// The heating at `t`.
fn heating(model: &Model, t: &[f64]) -> Vec<f64> {
    let mut ws = Workspace::new(t.len());
    let mut g = vec![0.0; t.len()];
    model.heating(0.0, t, &mut ws, &mut g);
    g
}

/// Dense Jacobian by central differences with step `h` K.
fn fd_jacobian(model: &Model, t: &[f64], h: f64) -> Vec<f64> {
    let n = t.len();
    let mut dense = vec![0.0; n * n];
    let mut tp = t.to_vec();
    for j in 0..n {
        tp[j] = t[j] + h;
        let gp = heating(model, &tp);
        tp[j] = t[j] - h;
        let gm = heating(model, &tp);
        tp[j] = t[j];
        for i in 0..n {
            dense[i * n + j] = (gp[i] - gm[i]) / (2.0 * h);
        }
    }
    dense
}

/// The Jacobian assembled the plain way: transport first, then each band's albedo and OLR
/// derivatives added (the general path of `Model::heating_jacobian`).
fn plain_jacobian(model: &Model, t: &[f64]) -> Tridiag {
    let n = t.len();
    let d = model.drivers_at(0.0);
    let Sunlight::Fixed(sun) = &model.sunlight else {
        panic!("annual-mean insolation expected")
    };
    let mut jac = Tridiag::zeros(n);
    model.transport.add_jacobian(&mut jac);
    for i in 0..n {
        let (_, da) = model.albedo.band(t, i);
        let (olr, dolr) = model.longwave.eval(t[i]);
        let (_, dolr) = d.olr(olr, dolr, t[i]);
        let s = d.solar_scale * sun[i];
        jac.diag[i] += -s * da[1] - dolr;
        if i > 0 {
            jac.lower[i] += -s * da[0];
        }
        if i + 1 < n {
            jac.upper[i] += -s * da[2];
        }
    }
    jac
}

fn bits(v: &[f64]) -> Vec<u64> {
    v.iter().map(|x| x.to_bits()).collect()
}

/// The values with -0.0 read as +0.0: a zero entry is written `0 + (-s * 0)` by one pass and
/// `-s * 0` by the other; the two zeros compare equal and act the same in every later sum.
fn exact(v: &[f64]) -> Vec<u64> {
    v.iter().map(|x| (x + 0.0).to_bits()).collect()
}

#[test]
fn model_jacobian_matches_finite_differences_and_the_fused_pass_matches_the_plain_one() {
    let dir = tempdir("jacobian");
    std::fs::write(dir.join("olr.csv"), TABLE).unwrap();
    let mut cases = 0;
    for albedo in ALBEDO {
        for olr in OLR {
            for transport in TRANSPORT {
                for domain in DOMAIN {
                    let text = config_text(albedo, olr, transport, domain, 16);
                    let cfg = load(&dir, &text);
                    let model = Model::from_spec(&cfg.spec.model);
                    let n = model.len();
                    for (drop, edge) in [(60.0, true), (20.0, false)] {
                        let what = format!("{albedo} x {olr} x {transport} x {domain}, edge band {edge}");
                        let t = state(&model, drop);
                        let crossings = t
                            .windows(2)
                            .filter(|w| (w[0] - 263.15) * (w[1] - 263.15) < 0.0)
                            .count();
                        assert_eq!(crossings > 0, edge, "{what}: {t:?}");

                        // Fused pass against the plain passes, bit for bit.
                        let mut ws = Workspace::new(n);
                        let mut g = vec![0.0; n];
                        let mut jac = Tridiag::zeros(n);
                        model.heating_with_jacobian(0.0, &t, &mut ws, &mut g, &mut jac);
                        assert_eq!(bits(&g), bits(&heating(&model, &t)), "{what}: heating");
                        let mut alone = Tridiag::zeros(n);
                        model.heating_jacobian(0.0, &t, &mut Workspace::new(n), &mut alone);
                        let plain = plain_jacobian(&model, &t);
                        // The plain assembly uses the interpolated edge rule; the edge-balance
                        // rule (step albedo under relaxation) has its own fused-vs-plain check in
                        // tests/physics.rs (edge_balance_jacobian_matches_finite_differences).
                        let mut against = vec![("heating_jacobian", &alone)];
                        if !model.uses_edge_balance() {
                            against.push(("plain assembly", &plain));
                        }
                        for (name, m) in against {
                            assert_eq!(exact(&jac.diag), exact(&m.diag), "{what}: diagonal vs {name}");
                            assert_eq!(
                                exact(&jac.lower[1..]),
                                exact(&m.lower[1..]),
                                "{what}: lower vs {name}"
                            );
                            assert_eq!(
                                exact(&jac.upper[..n - 1]),
                                exact(&m.upper[..n - 1]),
                                "{what}: upper vs {name}"
                            );
                            assert_eq!(
                                jac.rank_one.map(f64::to_bits),
                                m.rank_one.map(f64::to_bits),
                                "{what}: rank one vs {name}"
                            );
                        }

                        // Against central differences: with h = 1e-4 K the truncation error
                        // h^2/6 |G'''| is below 1e-8 W m-2 K-1 for these forms (the smooth
                        // albedo's 5 K width gives the largest G''', about S da / w^3 ~ 1), and
                        // rounding eps |G| / h is below 1e-9; 1e-6 (1 + |J|) leaves margin.
                        let dense = jac.to_dense(&model.grid.weights);
                        let fd = fd_jacobian(&model, &t, 1e-4);
                        for i in 0..n {
                            for j in 0..n {
                                let (a, b) = (dense[i * n + j], fd[i * n + j]);
                                assert!(
                                    (a - b).abs() <= 1e-6 * (1.0 + b.abs()),
                                    "{what}: dG_{i}/dT_{j} = {a}, finite differences {b}"
                                );
                            }
                        }
                        cases += 1;
                    }
                }
            }
        }
    }
    assert_eq!(
        cases,
        2 * ALBEDO.len() * OLR.len() * TRANSPORT.len() * DOMAIN.len()
    );
    let _ = std::fs::remove_dir_all(&dir);
}

#[test]
fn wide_and_baseline_stepping_kernels_agree_for_every_form() {
    // Ros2::step_wide (AVX2 + FMA) inlines the fused heating-with-Jacobian pass; the baseline
    // copy is forced by ICEFOLD_BASELINE_CPU (src/cpu.rs). On a CPU without AVX2 and FMA both
    // runs take the baseline copy and the check is trivial.
    let dir = tempdir("jacobian-cpu");
    std::fs::write(dir.join("olr.csv"), TABLE).unwrap();
    for albedo in ALBEDO {
        for olr in OLR {
            for transport in TRANSPORT {
                for domain in DOMAIN {
                    let mut text = config_text(albedo, olr, transport, domain, 16);
                    text += "[time]\nyears = 30\n[initial]\ntemperature_c = 5\n";
                    std::fs::write(dir.join("c.toml"), &text).unwrap();
                    let mut read = Vec::new();
                    for (baseline, out) in [(false, "wide.nc"), (true, "base.nc")] {
                        let mut c = Command::new(BIN);
                        c.args(["run", "c.toml", "-o", out, "--overwrite"])
                            .current_dir(&dir);
                        if baseline {
                            c.env("ICEFOLD_BASELINE_CPU", "1");
                        } else {
                            c.env_remove("ICEFOLD_BASELINE_CPU");
                        }
                        let o = c.output().unwrap();
                        assert!(
                            o.status.success(),
                            "{text}: {}",
                            String::from_utf8_lossy(&o.stderr)
                        );
                        let r = NcReader::open(&dir.join(out)).unwrap();
                        read.push(bits(&r.read_f64("surface_temperature").unwrap()));
                    }
                    assert_eq!(read[0], read[1], "{albedo} x {olr} x {transport} x {domain}");
                }
            }
        }
    }
    let _ = std::fs::remove_dir_all(&dir);
}
