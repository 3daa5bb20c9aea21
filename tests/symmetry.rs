//! Symmetry breaking on a globe (issue 12, defect 7): branch points on the symmetric branches,
//! the asymmetric branches with one hemisphere ice free and the other capped, their count in
//! the regime map, and asymmetric starts for Newton.

use icefold::config::{load_str, Loaded};
use icefold::equilibrium::branches::all_branches;
use icefold::equilibrium::continuation::ContinuationOptions;
use icefold::equilibrium::control::Controlled;
use icefold::equilibrium::regimes::{regime_row, Kind};
use icefold::equilibrium::stability::leading_eigenvalue;
use icefold::equilibrium::symmetry::{antisymmetric_leading, asymmetry, mirror};
use icefold::equilibrium::{newton, NewtonOptions};
use icefold::model::Model;
use std::path::Path;

/// The classic step-albedo parameters (configs/regimes-classic.toml) on a globe of 40 bands:
/// asymmetric stable states exist for S0 in about (1335.6, 1344.3) W m-2 (measured).
fn globe(s0: f64) -> Loaded {
    let text = format!(
        "[grid]\ndomain = \"globe\"\nbands = 40\n[insolation]\nsolar_constant = {s0}\ns2 = -0.482\n\
         [albedo]\nice_free = 0.303\nice_free_p2 = 0.0779\nice = 0.62\nfreeze_temperature_c = -10.0\n\
         [longwave]\na = 203.3\nb = 2.09\n[transport]\ndiffusivity = 0.52\n[heat_capacity]\nvalue = 4.0e8\n\
         [branches]\ncontrol = \"insolation.solar_constant\"\nfrom = 1300.0\nto = 1400.0\nstep = 0.005\nmax_step = 0.02\n"
    );
    load_str(&text, "globe.toml", Path::new("."), &[]).unwrap()
}

fn options(cfg: &Loaded) -> ContinuationOptions {
    ContinuationOptions::from_spec(cfg.spec.branches.as_ref().unwrap(), 1e-9)
}

/// Plain Newton from a start with a cap in the north only (warm south): independent of the
/// continuation and of the symmetry code.
fn asymmetric_by_newton(s0: f64) -> (Model, Vec<f64>) {
    let model = Model::from_spec(&globe(s0).spec.model);
    let start: Vec<f64> = model
        .grid
        .x_centres
        .iter()
        .map(|&x| 288.15 - 15.0 * x - 30.0 * icefold::grid::p2(x))
        .collect();
    let r = newton(&model, 0.0, &start, NewtonOptions::default()).unwrap();
    (model, r.state)
}

#[test]
fn asymmetric_stable_states_lie_on_a_traced_asymmetric_branch() {
    // Common practice: an equilibrium found by plain Newton must lie on a traced branch. At
    // S0 = 1340 the north-capped start settles on a stable state with an ice-free south.
    let s0 = 1340.0;
    let (model, t) = asymmetric_by_newton(s0);
    let (north, south) = model.ice_edges(&t);
    assert!(north < 80.0 && south.unwrap() == -90.0, "{north} {south:?}");
    assert!(asymmetry(&t) > 1.0);
    assert!(leading_eigenvalue(&model, 0.0, &t).0 < 0.0);
    let cfg = globe(s0);
    let fam = Controlled::new(&cfg, "insolation.solar_constant").unwrap();
    let set = all_branches(&fam, options(&cfg)).unwrap();
    let asym = &set.branches[set.asymmetric_from..];
    assert!(!asym.is_empty(), "no asymmetric branch traced");
    // Every asymmetric branch point is asymmetric; the symmetric ones are symmetric.
    for b in asym {
        assert!(b.points.iter().all(|q| asymmetry(&q.state) > 1e-6));
    }
    // The state (or its mirror) is on an asymmetric branch: interpolated between the two points
    // around S0 it agrees to the chord error of the polyline (0.05 K at these steps).
    let mut best = f64::INFINITY;
    for b in asym {
        for w in b.points.windows(2) {
            let (a, z) = (&w[0], &w[1]);
            if (a.control - s0) * (z.control - s0) > 0.0 || a.control == z.control {
                continue;
            }
            let f = (s0 - a.control) / (z.control - a.control);
            let mid: Vec<f64> = a
                .state
                .iter()
                .zip(&z.state)
                .map(|(x, y)| x + f * (y - x))
                .collect();
            for cand in [t.clone(), mirror(&t)] {
                let d = mid
                    .iter()
                    .zip(&cand)
                    .map(|(x, y)| (x - y).abs())
                    .fold(0.0, f64::max);
                best = best.min(d);
            }
        }
    }
    assert!(best < 0.05, "nearest asymmetric branch point {best} K away");
}

#[test]
fn branch_point_is_where_the_antisymmetric_eigenvalue_vanishes() {
    // The located pitchfork on the small-cap branch: the antisymmetric eigenvalue changes sign
    // across it (checked by symmetric Newton 1e-6 W m-2 to either side), and a tiny
    // antisymmetric kick decays on one side and grows on the other.
    let cfg = globe(1340.0);
    let fam = Controlled::new(&cfg, "insolation.solar_constant").unwrap();
    let set = all_branches(&fam, options(&cfg)).unwrap();
    let smooth: Vec<_> = set
        .breaks
        .iter()
        .filter(|b| b.converged && !b.corner && fam.base_model().ice_edges(&b.state).0 > 60.0)
        .collect();
    assert_eq!(
        smooth.len(),
        1,
        "{:?}",
        set.breaks.iter().map(|b| b.control).collect::<Vec<_>>()
    );
    let bp = smooth[0];
    assert!(asymmetry(&bp.state) < 1e-9);
    let sign_at = |dp: f64| {
        let m = fam.model_at(bp.control + dp).unwrap();
        let t = icefold::equilibrium::symmetry::symmetric_equilibrium(&m, &bp.state, 1e-10).unwrap();
        antisymmetric_leading(&m, &t)
    };
    let (lo, hi) = (sign_at(-1e-3), sign_at(1e-3));
    assert!(lo * hi < 0.0, "{lo} {hi}");
    assert!(bp.asymmetric_branch.is_some());
}

#[test]
fn regimes_count_asymmetric_states_as_a_kind_of_their_own() {
    // At S0 = 1340: ice free, small cap and snowball (symmetric, stable) and the asymmetric
    // state with its mirror image: 5 stable states of 4 kinds (the count).
    let cfg = globe(1340.0);
    let fam = Controlled::new(&cfg, "insolation.solar_constant").unwrap();
    let row = regime_row(
        &fam,
        options(&cfg),
        &[1340.0, 1390.0],
        0.52,
        icefold::equilibrium::regimes::SMALL_CAP_MIN_LATITUDE,
    )
    .unwrap();
    assert_eq!(row.stable[0], 5, "{row:?}");
    let want = Kind::IceFree.bit() | Kind::SmallCap.bit() | Kind::Snowball.bit() | Kind::Asymmetric.bit();
    assert_eq!(row.kinds[0], want);
    // At 1390 only ice free and snowball remain, symmetric.
    assert_eq!(row.stable[1], 2);
    assert_eq!(row.kinds[1], Kind::IceFree.bit() | Kind::Snowball.bit());
}
