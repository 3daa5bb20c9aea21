"""Outside references for icefold's numbers.

- `discrete`: a plain numpy/scipy implementation of the discrete model in docs/discrete-model.md,
  driven by the same TOML configs, integrated with scipy's solve_ivp.
- `north1975`: the exact step-albedo equilibria of the continuous hemispheric model with constant
  diffusivity (North 1975, J. Atmos. Sci. 32, 1301-1307; small caps: North 1984, J. Atmos. Sci. 41),
  in Legendre functions of complex degree, computed with mpmath.
- `budyko1969`: closed-form ice-edge equilibria with relaxation transport (Budyko 1969, Tellus 21).

Units: W m-2 for fluxes, K (or degrees C where named `_c`), years for configured times.
"""
