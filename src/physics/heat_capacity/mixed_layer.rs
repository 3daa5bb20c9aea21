//! Heat capacity of an ocean mixed layer and of land, mixed by area in each band:
//! `C_i = (1 - f_i) C_ocean + f_i C_land` with `f_i` the band's land fraction; `C_ocean` given
//! directly or as `rho c_p h` for a mixed layer of depth `h` of sea water.
//!
//! When to use it: every run; the depth sets how fast the model relaxes (about 4 years for
//! 50 m of water under a 2 W m-2 K-1 restoring), and land (small `C`) speeds up the seasonal
//! response of the bands that hold it.
//!
//! Reference: common practice (a slab ocean mixed layer); sea water `rho = 1025 kg m-3`,
//! `c_p = 3985 J kg-1 K-1` (common practice).

/// Heat capacity of each of `n` bands (J m-2 K-1) from the ocean and land values
/// (J m-2 K-1) and the land fraction by band (missing entries: no land).
pub fn by_band(n: usize, ocean: f64, land: f64, land_fraction: &[f64]) -> Vec<f64> {
    (0..n)
        .map(|i| {
            let f = land_fraction.get(i).copied().unwrap_or(0.0);
            (1.0 - f) * ocean + f * land
        })
        .collect()
}
