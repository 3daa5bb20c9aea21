//! The `gray_layer` OLR kind (one gray atmospheric layer) against its closed-form equilibrium,
//! and as a control of a sweep (a key declared beside its physics only).

mod common_cli;

use common_cli::{icefold, tempdir};
use icefold::output::NcReader;

/// A one-band globe with a fixed albedo 0.3 under one gray layer of emissivity `eps`.
fn config(eps: f64) -> String {
    format!(
        "[grid]\ndomain = \"globe\"\nbands = 1\n[insolation]\ns2 = 0.0\n\
         [albedo]\nkind = \"smooth\"\nice_free = 0.3\nice = 0.3\n\
         [longwave]\nkind = \"gray_layer\"\nlayer_emissivity = {eps:?}\n"
    )
}

#[test]
fn one_band_equilibrium_is_the_closed_form_of_one_gray_layer() {
    // Closed form (common textbook practice): S0/4 (1 - albedo) = (1 - eps/2) sigma T^4.
    let sigma = 5.670_374_419e-8; // CODATA 2018
    let dir = tempdir("gray-layer");
    for eps in [0.0, 0.78, 1.0] {
        std::fs::write(dir.join("c.toml"), config(eps)).unwrap();
        let _ = std::fs::remove_file(dir.join("e.nc"));
        let o = icefold(&dir, &["equilibrium", "c.toml", "-o", "e.nc"]);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let t = NcReader::open(&dir.join("e.nc"))
            .unwrap()
            .read_f64("surface_temperature")
            .unwrap()[0];
        let exact = (1361.0 / 4.0 * 0.7 / ((1.0 - eps / 2.0) * sigma)).powf(0.25);
        // Newton stops at a residual of 1e-9 W m-2; dOLR/dT is about 3 W m-2 K-1 here.
        assert!(
            (t - exact).abs() < 1e-8,
            "eps {eps}: {t} K, closed form {exact} K"
        );
    }
    // The key is a control through its registry setter (rebuild from the typed spec).
    let sweep = "[sweep]\ncontrol = \"longwave.layer_emissivity\"\nfrom = 0.5\nto = 0.6\nsteps = 3\n";
    std::fs::write(dir.join("s.toml"), config(0.5) + sweep).unwrap();
    let o = icefold(&dir, &["sweep", "s.toml", "-o", "s.nc"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let r = NcReader::open(&dir.join("s.nc")).unwrap();
    let control = r.read_f64("control").unwrap();
    let temps = r.read_f64("global_mean_temperature").unwrap();
    for (p, t) in control.iter().zip(&temps) {
        let exact = (1361.0 / 4.0 * 0.7 / ((1.0 - p / 2.0) * sigma)).powf(0.25);
        // Settled by time stepping and polished by Newton (residual 1e-9 W m-2).
        assert!((t - exact).abs() < 1e-6, "eps {p}: {t} K, closed form {exact} K");
    }
    let _ = std::fs::remove_dir_all(&dir);
}
