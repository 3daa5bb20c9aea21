//! Seasonal insolation (issue 4): the model's daily-mean insolation against published values
//! and against the exact annual mean, the orbit table against the exact antiderivative, and a
//! seasonal run settling into a periodic state.

use icefold::config::{self, Loaded};
use icefold::grid::{Domain, Grid, Spacing};
use icefold::insolation::{self, band_mean_shape_exact, daily_mean_shape, orbit_at, SeasonalTable};
use icefold::model::{Model, Workspace};
use icefold::output::NcReader;
use icefold::quadrature::ClusteredRule;
use std::f64::consts::PI;
use std::path::Path;

fn load(domain: &str, bands: usize, spacing: &str, sets: &[String]) -> Loaded {
    // Albedo 0 everywhere, so the absorbed sunlight of `Model::budget` is the insolation.
    let text = format!(
        "[grid]\ndomain = \"{domain}\"\nbands = {bands}\nspacing = \"{spacing}\"\n\
         [insolation]\nkind = \"seasonal\"\nsolar_constant = 1361.0\n\
         [albedo]\nice_free = 0.0\nice_free_p2 = 0.0\nice = 0.0\n"
    );
    config::load_str(&text, "test", Path::new("."), sets).unwrap()
}

fn orbit(obliquity: f64, ecc: f64, peri: f64) -> Vec<String> {
    vec![
        format!("insolation.obliquity_deg={obliquity}"),
        format!("insolation.eccentricity={ecc}"),
        format!("insolation.perihelion_deg={peri}"),
    ]
}

/// The model's insolation by band at `t` (years), W m-2.
fn sun_at(model: &Model, t: f64) -> Vec<f64> {
    let mut ws = Workspace::new(model.len());
    let temps = vec![288.0; model.len()];
    model.budget(t, &temps, &mut ws).absorbed
}

/// Time mean over one year of the model's insolation: periodic trapezoid rule with `m` points.
fn annual_mean_of_seasonal(model: &Model, m: usize) -> Vec<f64> {
    let mut acc = vec![0.0; model.len()];
    for k in 0..m {
        for (a, s) in acc.iter_mut().zip(sun_at(model, k as f64 / m as f64)) {
            *a += s / m as f64;
        }
    }
    acc
}

#[test]
fn annual_mean_of_seasonal_equals_the_annual_mean_kind_in_every_band() {
    // Reference: DESIGN section 6 and Berger (1978, J. Atmos. Sci. 35): the annual-mean kind is
    // the time mean of the daily mean. The periodic trapezoid rule in time with 20000 points
    // has error far below 1e-6 (the integrand is C^2 in time; measured 1e-9).
    for (domain, n, spacing) in [
        ("globe", 90, "equal_area"),
        ("hemisphere", 45, "equal_angle"),
        ("globe", 7, "equal_area"),
    ] {
        for (obl, ecc, peri) in [(23.44, 0.0167, 282.9), (60.0, 0.1, 45.0), (10.0, 0.3, 180.0)] {
            let sets = orbit(obl, ecc, peri);
            let seasonal = Model::from_spec(&load(domain, n, spacing, &sets).spec.model);
            let mut set2 = sets.clone();
            set2.push("insolation.kind=annual_mean".into());
            let annual = Model::from_spec(&load(domain, n, spacing, &set2).spec.model);
            let got = annual_mean_of_seasonal(&seasonal, 20_000);
            let want = sun_at(&annual, 0.0);
            for i in 0..n {
                let rel = (got[i] - want[i]).abs() / want[i];
                assert!(
                    rel < 1e-6,
                    "{domain} {n} {spacing} {obl} {ecc}: band {i}: {} vs {} ({rel:e})",
                    got[i],
                    want[i]
                );
            }
            // Reference: DESIGN section 6, Kepler's second law: global annual mean S0 / (4 sqrt(1 - e^2)).
            let g = &seasonal.grid;
            let global = g.mean(&got);
            let expect = 1361.0 / (4.0 * (1.0 - ecc * ecc).sqrt());
            assert!(
                (global / expect - 1.0).abs() < 1e-8,
                "{domain} {n}: {global} vs {expect}"
            );
        }
    }
}

#[test]
fn polar_solstice_daily_mean_is_s0_sin_obliquity_on_a_circular_orbit() {
    // Reference: Berger (1978); DESIGN section 6: at the summer solstice of a circular orbit the
    // pole receives S0 sin(obliquity) (sun at elevation equal to the obliquity all day).
    for obl in [10.0_f64, 23.44, 45.0] {
        let eps = obl.to_radians();
        let at = orbit_at(0.25, eps, 0.0, 0.0);
        assert!((at.sin_delta - eps.sin()).abs() < 1e-12);
        assert!((1361.0 * daily_mean_shape(1.0, eps.sin(), eps.cos()) - 1361.0 * eps.sin()).abs() < 1e-9);
        // Through the model: the polar band [a, 1] is all in polar day, where the daily mean is
        // S0 x sin(delta), so its band mean is exactly S0 sin(obliquity) (a + 1) / 2.
        let model = Model::from_spec(
            &load("hemisphere", 90, "equal_area", &orbit(obl, 0.0, 0.0))
                .spec
                .model,
        );
        let s = sun_at(&model, 0.25);
        let a = model.grid.x_faces[89];
        let want = 1361.0 * eps.sin() * (a + 1.0) / 2.0;
        assert!((s[89] / want - 1.0).abs() < 1e-12, "{obl}: {} vs {want}", s[89]);
        // And in the limit of a thin polar band (2000 bands: a = 1 - 5e-4).
        let fine = Model::from_spec(
            &load("hemisphere", 2000, "equal_area", &orbit(obl, 0.0, 0.0))
                .spec
                .model,
        );
        let s = sun_at(&fine, 0.25);
        assert!((s[1999] / (1361.0 * eps.sin()) - 1.0).abs() < 3e-4);
    }
}

#[test]
fn equator_gets_s0_over_pi_at_the_equinoxes() {
    // Reference: Berger (1978); DESIGN section 6: at an equinox (declination 0) the daily mean
    // at the equator is S0/pi on a circular orbit, times (a/r)^2 on an eccentric one. The band
    // mean of S0 cos(phi)/pi over [-d, d] in x is S0 (asin d + d sqrt(1 - d^2)) / (2 pi d).
    assert_eq!(daily_mean_shape(0.0, 0.0, 1.0), 1.0 / PI);
    for ecc in [0.0, 0.0167, 0.2] {
        let model = Model::from_spec(
            &load("globe", 91, "equal_area", &orbit(23.44, ecc, 100.0))
                .spec
                .model,
        );
        let d = model.grid.x_faces[46];
        let band = 1361.0 * (d.asin() + d * (1.0 - d * d).sqrt()) / (2.0 * PI * d);
        // Spring equinox at t = 0; the autumn equinox where the true longitude is pi.
        let peri = 100.0_f64.to_radians();
        let longitude = |t: f64| {
            orbit_at(t, 23.44_f64.to_radians(), ecc, peri)
                .longitude
                .rem_euclid(2.0 * PI)
        };
        // The true longitude grows through the year; bisect for longitude = pi.
        let autumn = {
            let (mut lo, mut hi) = (0.1, 0.9);
            for _ in 0..100 {
                let mid = 0.5 * (lo + hi);
                if longitude(mid) < PI {
                    lo = mid;
                } else {
                    hi = mid;
                }
            }
            0.5 * (lo + hi)
        };
        for t in [0.0, autumn] {
            let at = orbit_at(t, 23.44_f64.to_radians(), ecc, peri);
            assert!(at.sin_delta.abs() < 1e-9, "{ecc} {t}: {}", at.sin_delta);
            let s = sun_at(&model, t);
            let want = band * at.distance_factor;
            // The equatorial band comes from the orbit table: within 1e-7 of S0 (a/r)^2.
            assert!(
                (s[45] - want).abs() < 1e-7 * 1361.0 * at.distance_factor,
                "{ecc} {t}: {} vs {want}",
                s[45]
            );
            if ecc == 0.0 {
                assert!((at.distance_factor - 1.0).abs() < 1e-15);
            }
        }
    }
}

#[test]
fn exact_antiderivative_matches_quadrature_and_the_table_matches_it() {
    // The closed form against the clustered Gauss-Legendre quadrature of the daily-mean shape
    // split at the polar circles (48 points per piece: converged to round-off, common practice).
    let rule = ClusteredRule::new(48);
    for (dom, n) in [(Domain::Globe, 36), (Domain::Hemisphere, 11)] {
        let g = Grid::new(dom, Spacing::EqualAngle, n);
        for obl in [5.0_f64, 23.44, 60.0, 120.0] {
            for t in [0.0, 0.13, 0.25, 0.4, 0.77] {
                let at = orbit_at(t, obl.to_radians(), 0.05, 1.0);
                let mut quad = vec![0.0; n];
                insolation::daily_mean_bands(&g, &rule, 1361.0, at, &mut quad);
                for (i, q) in quad.iter().enumerate() {
                    let exact = 1361.0
                        * at.distance_factor
                        * band_mean_shape_exact(g.x_faces[i], g.x_faces[i + 1], at.sin_delta);
                    assert!(
                        (exact - q).abs() < 1e-9 * 1361.0,
                        "{obl} {t} {i}: {exact} vs {}",
                        q
                    );
                }
            }
        }
    }
    // The orbit table interpolates within 1e-7 of S0 (its documented accuracy) at 5000 times
    // spread over the year, on coarse and fine grids and for small and large obliquities.
    for (dom, n, sp) in [
        (Domain::Globe, 90, Spacing::EqualArea),
        (Domain::Globe, 9, Spacing::EqualAngle),
        (Domain::Hemisphere, 400, Spacing::EqualArea),
    ] {
        let g = Grid::new(dom, sp, n);
        for (obl, ecc) in [(23.44_f64, 0.0167), (5.0, 0.0), (45.0, 0.3), (80.0, 0.05)] {
            let tab = SeasonalTable::new(&g, 1361.0, obl.to_radians(), ecc, 0.7);
            let mut out = vec![0.0; n];
            for k in 0..5000 {
                let t = (k as f64 + 0.37) / 5000.0;
                let at = tab.orbit(t);
                tab.eval_at(at, &mut out);
                for (i, o) in out.iter().enumerate() {
                    let exact = 1361.0
                        * at.distance_factor
                        * band_mean_shape_exact(g.x_faces[i], g.x_faces[i + 1], at.sin_delta);
                    let err = (o - exact).abs() / (1361.0 * at.distance_factor);
                    assert!(
                        err < 1e-7,
                        "{n} bands, obliquity {obl}: band {i} at t = {t}: error {err:e}"
                    );
                }
            }
        }
    }
}

#[test]
fn seasonal_run_reaches_a_periodic_state() {
    // A periodic forcing drives a damped linear-ish system to a periodic cycle (common
    // practice). Here the slowest mode (slowed by the ice-albedo feedback) decays by about a
    // factor 0.72 a year, measured: 4e-5 K a year after 30 years, so 40 years are run.
    let path = std::env::temp_dir().join(format!("icefold-seasonal-{}.nc", std::process::id()));
    let cfg = config::load(
        &Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/seasonal-globe.toml"),
        &[
            "grid.bands=45".into(),
            "time.years=40".into(),
            "time.output=annual_mean".into(),
            "time.output_every_years=0.0833333333333333".into(),
        ],
    )
    .unwrap();
    icefold::jobs::run::run_to_file(&cfg, &path, "test", false).unwrap();
    let r = NcReader::open(&path).unwrap();
    let t = r.read_f64("time").unwrap();
    let g = r.read_f64("global_mean_temperature").unwrap();
    assert_eq!(t.len(), 40);
    assert_eq!(t[0], 0.5);
    assert_eq!(
        r.var_attr_str("global_mean_temperature", "cell_methods")
            .unwrap()
            .as_deref(),
        Some("time: mean")
    );
    let last = (g[39] - g[38]).abs();
    assert!(last < 1e-4, "year-to-year change {last} K");
    // It did get there from a start that was far off: the first years drift by much more.
    assert!((g[1] - g[0]).abs() > 100.0 * last);
    // The seasonal cycle itself is there: monthly records of the same run swing by kelvins.
    drop(r);
    let cfg = config::load(
        &Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/seasonal-globe.toml"),
        &["grid.bands=45".into(), "time.years=3".into()],
    )
    .unwrap();
    icefold::jobs::run::run_to_file(&cfg, &path, "test", false).unwrap();
    let r = NcReader::open(&path).unwrap();
    let south = r.read_f64("ice_edge_latitude_south").unwrap();
    let (lo, hi) = south[12..]
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
            (a.min(*x), b.max(*x))
        });
    assert!(hi - lo > 1.0, "southern ice edge swings {lo}..{hi}");
    std::fs::remove_file(&path).unwrap();
}

#[test]
fn annual_means_are_the_trapezoid_means_of_the_samples_and_every_step_records_each_step() {
    // By construction (our definition, documented with time.output): an annual-mean record is
    // the trapezoid mean over the year of the samples at the output cadence, so it equals the
    // mean computed here from an instant run with the same cadence, to round-off.
    let dir = std::env::temp_dir();
    let cfg_path = Path::new(env!("CARGO_MANIFEST_DIR")).join("configs/seasonal-globe.toml");
    let common = [
        "grid.bands=15".to_string(),
        "time.years=3".into(),
        "time.output_every_years=0.0833333333333333".into(),
    ];
    let inst_path = dir.join(format!("icefold-inst-{}.nc", std::process::id()));
    let mean_path = dir.join(format!("icefold-mean-{}.nc", std::process::id()));
    let inst = config::load(&cfg_path, &common).unwrap();
    icefold::jobs::run::run_to_file(&inst, &inst_path, "test", false).unwrap();
    let mut sets = common.to_vec();
    sets.push("time.output=annual_mean".into());
    let mean = config::load(&cfg_path, &sets).unwrap();
    icefold::jobs::run::run_to_file(&mean, &mean_path, "test", false).unwrap();
    let (ri, rm) = (
        NcReader::open(&inst_path).unwrap(),
        NcReader::open(&mean_path).unwrap(),
    );
    assert_eq!(rm.read_f64("time_bnds").unwrap(), [0.0, 1.0, 1.0, 2.0, 2.0, 3.0]);
    for name in [
        "global_mean_temperature",
        "toa_imbalance",
        "ice_edge_latitude_south",
        "solar_scale",
    ] {
        let x = ri.read_f64(name).unwrap();
        let m = rm.read_f64(name).unwrap();
        assert_eq!(x.len(), 37);
        for y in 0..3 {
            let s = &x[12 * y..=12 * y + 12];
            let want = (0.5 * s[0] + s[1..12].iter().sum::<f64>() + 0.5 * s[12]) / 12.0;
            assert!(
                (m[y] - want).abs() <= 1e-12 * want.abs().max(1.0),
                "{name} year {y}: {} vs {want}",
                m[y]
            );
        }
    }
    let t = ri.read_f64("surface_temperature").unwrap();
    let tm = rm.read_f64("surface_temperature").unwrap();
    let want: f64 = (0.5 * t[7] + (1..12).map(|k| t[15 * k + 7]).sum::<f64>() + 0.5 * t[15 * 12 + 7]) / 12.0;
    assert!((tm[7] - want).abs() < 1e-10);
    drop((ri, rm));
    // Every step: one record per accepted step plus the start, ending exactly at the run's end.
    let mut sets = common.to_vec();
    sets.push("time.output=every_step".into());
    let every = config::load(&cfg_path, &sets).unwrap();
    let report = icefold::jobs::run::run_to_file(&every, &inst_path, "test", false).unwrap();
    let r = NcReader::open(&inst_path).unwrap();
    let times = r.read_f64("time").unwrap();
    assert_eq!(times.len() as u64, report.summary.stats.steps + 1);
    assert!(times.windows(2).all(|w| w[1] > w[0]));
    assert_eq!(*times.last().unwrap(), 3.0);
    // 6-day steps: 3 years need ceil(3 * 365.25 / 6) = 183 of them.
    assert_eq!(report.summary.stats.steps, 183);
    drop(r);
    std::fs::remove_file(&inst_path).unwrap();
    std::fs::remove_file(&mean_path).unwrap();
    // The choices are checked.
    let text = std::fs::read_to_string(&cfg_path).unwrap();
    for (sets, key, allowed) in [
        (
            vec!["time.output=every_step", "time.method=dopri5"],
            "time.output",
            "implicit",
        ),
        (
            vec!["time.output=annual_mean", "time.output_every_years=0.3"],
            "time.output_every_years",
            "divide a year",
        ),
        (
            vec!["time.output=annual_mean", "time.years=0.5"],
            "time.years",
            "whole model years",
        ),
        (vec!["time.output=hourly"], "time.output", "annual_mean"),
    ] {
        let sets: Vec<String> = sets.iter().map(|s| s.to_string()).collect();
        // Without the fixed step (allowed only with the implicit scheme).
        let e = config::load_str(
            &text.replace("step_days = 6.0", ""),
            "seasonal",
            Path::new("."),
            &sets,
        );
        let msg = e.map(|_| String::new()).unwrap_or_else(|e| e.to_string());
        assert!(msg.contains(key) && msg.contains(allowed), "{sets:?}: {msg}");
    }
}
