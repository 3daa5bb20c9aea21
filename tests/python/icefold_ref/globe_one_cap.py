"""Exact step-albedo equilibria of the continuous model on the whole globe with an ice cap in the
northern hemisphere only (the southern one ice free): the asymmetric states of symmetry breaking.

Same equations as north1975 (North 1975, J. Atmos. Sci. 32, 1301-1307) on -1 <= x <= 1, T
bounded at both poles. In the ice region (x > x_s) the homogeneous part is P_nu(x) (regular at
x = 1), in the ice-free region (x < x_s) it is P_nu(-x) (regular at x = -1); the particular
parts (P0, P2, P4) are North's. Continuity of T and dT/dx at x_s plus T(x_s) = T_f is again a
3 x 3 linear system in (Q, c_free, c_ice). (The hemispheric model's ice-free region instead
uses the even P_nu(x) + P_nu(-x), T'(0) = 0.)
"""

from __future__ import annotations

import mpmath as mp

from . import north1975 as n75


def q_of_xs(xs: float, p: n75.Params) -> float:
    """Q = S0/4 (W m-2) of the globe equilibrium with ice only in x > x_s (0 < x_s < 1)."""
    with mp.workdps(n75.DPS):
        x = mp.mpf(xs)
        nu = n75.degree(p)
        uf, duf = n75._particular(n75.free_coefficients(p), p, x)
        ui, dui = n75._particular(n75.ice_coefficients(p), p, x)
        pp, dpp = n75.legendre_p(nu, x)
        pm, dpm = n75.legendre_p(nu, -x)
        hf, dhf = pm, -dpm  # d/dx P_nu(-x) = -P_nu'(-x)
        hi, dhi = pp, dpp
        rhs_t = mp.mpf(p.tf_c) + mp.mpf(p.a_eff) / p.b
        m = mp.matrix([[uf, hf, 0], [ui, 0, hi], [duf - dui, dhf, -dhi]])
        sol = mp.lu_solve(m, mp.matrix([rhs_t, rhs_t, 0]))
        return float(sol[0])
