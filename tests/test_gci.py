"""Checks of elastofe.studies.gci."""

import math

import numpy as np
import pytest

from elastofe.studies.gci import grid_convergence, representative_size


def test_celik_2008_table1_first_column():
    # Celik et al., J. Fluids Eng. 130 (2008) 078001, Table 1, first phi column.
    # Inputs N = 18000, 8000, 4500 (2-D), phi = 6.063, 5.972, 5.863 -- from memory,
    # inputs also seen in a public script; published outputs below are from memory.
    h = representative_size([18000, 8000, 4500], dim=2)
    res = grid_convergence([6.063, 5.972, 5.863], h)
    r21, r32 = res.refinement_ratios
    assert round(r21, 3) == 1.5 and round(r32, 3) == 1.333      # Table 1: r21 = 1.5, r32 = 1.333
    assert res.convergence == "monotonic"
    assert round(res.observed_order, 2) == 1.53                  # Table 1: p = 1.53 (from memory)
    assert round(res.extrapolated, 4) == 6.1685                  # Table 1: phi_ext21 = 6.1685 (from memory)
    assert round(100 * res.approx_rel_error, 1) == 1.5           # Table 1: e_a21 = 1.5 % (from memory)
    assert round(100 * res.extrap_rel_error, 1) == 1.7           # Table 1: e_ext21 = 1.7 % (from memory)
    assert round(100 * res.gci_fine, 1) == 2.2                   # Table 1: GCI_fine21 = 2.2 % (from memory)
    assert not res.likely_singular


@pytest.mark.parametrize("p_true", [0.8, 1.7, 2.0, 3.2])
def test_synthetic_power_law_non_constant_ratio(p_true):
    # f(h) = f0 + C h^p is reproduced exactly by Richardson extrapolation
    # (Roache 1994; Celik et al. 2008 eq. 4) -- synthetic, exact expectations.
    f0, C = 3.0, 0.8
    h = np.array([0.01, 0.015, 0.02, 0.031])  # r21 = 1.5, r32 = 1.333, r43 = 1.55
    f = f0 + C * h**p_true
    res = grid_convergence(f, h)
    assert res.convergence == "monotonic"
    assert res.observed_order == pytest.approx(p_true, rel=1e-9)
    assert res.extrapolated == pytest.approx(f0, rel=1e-12)
    assert res.orders_all == pytest.approx((p_true, p_true), rel=1e-9)
    # exact error on the fine grid: e_ext = |f0 - f1| / |f0|
    assert res.extrap_rel_error == pytest.approx(abs(f[0] - f0) / f0, rel=1e-8)
    r21 = 1.5
    ea = abs(f[0] - f[1]) / f[0]
    assert res.gci_fine == pytest.approx(1.25 * ea / (r21**p_true - 1), rel=1e-8)
    # GCI_fine = 1.25 * |f1 - f_exact| / |f1| for an exact power law (Roache 1994 definition)
    assert res.gci_fine == pytest.approx(1.25 * abs(f[0] - f0) / f[0], rel=1e-8)
    assert res.gci_coarse == pytest.approx(res.gci_fine * r21**p_true, rel=1e-12)
    # asymptotic ratio equals |f1/f2| for an exact power law (derivation in GridConvergence doc)
    assert res.asymptotic_ratio == pytest.approx(abs(f[0] / f[1]), rel=1e-8)


def test_oscillatory():
    # sign change of the differences marks oscillatory convergence (Celik et al. 2008, step 3)
    res = grid_convergence([1.00, 1.02, 0.97], [1.0, 1.5, 2.0])
    assert res.convergence == "oscillatory"
    assert res.observed_order > 0 and math.isfinite(res.observed_order)
    # self-consistency of eq. 3 at the returned p (s = -1)
    p = res.observed_order
    q = math.log((1.5**p + 1) / ((2.0 / 1.5) ** p + 1))
    assert p == pytest.approx(abs(math.log(abs(-0.05 / 0.02)) + q) / math.log(1.5), rel=1e-10)


def test_singular_power_law_is_flagged():
    # stress at a re-entrant corner grows like h^-lambda (common practice, lambda ~ 0.46 for a
    # 90-degree notch in mode I, from memory): divergent, signed order = -lambda
    h = np.array([0.25, 0.5, 0.75, 1.0])
    f = 100.0 * h**-0.456
    res = grid_convergence(f, h)
    assert res.convergence == "divergent"
    assert res.observed_order == pytest.approx(-0.456, rel=1e-9)
    assert res.likely_singular
    assert math.isnan(res.gci_fine)


def test_log_singularity_is_flagged():
    # logarithmic growth f = -ln h: the power-law order tends to 0 (borderline divergent)
    h = np.array([0.1, 0.2, 0.4])
    res = grid_convergence(-np.log(h) + 5.0, h)
    assert res.likely_singular
    assert res.observed_order == pytest.approx(0.0, abs=1e-9)


def test_converged_to_round_off():
    res = grid_convergence([2.0, 2.0 + 1e-16, 2.0 - 1e-16], [1.0, 2.0, 4.0])
    assert res.convergence == "converged"
    assert res.gci_fine == 0.0 and res.extrapolated == 2.0
    assert not res.likely_singular


def test_representative_size():
    # Celik et al. 2008 eq. 1: h = (V/N)^(1/dim)
    assert representative_size([1000], 3, total_measure=8.0)[0] == pytest.approx(0.2, rel=1e-14)


def test_invalid():
    with pytest.raises(ValueError, match="at least 3"):
        grid_convergence([1.0, 2.0], [1.0, 2.0])
    with pytest.raises(ValueError, match="strictly increasing"):
        grid_convergence([1.0, 2.0, 3.0], [2.0, 1.0, 3.0])


def test_low_order_growth_flagged_but_ordinary_growth_not():
    # growing magnitude with p = 0.05 <= 0.1 -> flagged; same growth with p = 2 -> not
    # (flag definition of this project, from the issue: p <= ~0.1 or divergent)
    h = np.array([0.1, 0.2, 0.4])
    slow = grid_convergence(10.0 - 5.0 * h**0.05, h)
    assert slow.convergence == "monotonic"
    assert slow.observed_order == pytest.approx(0.05, rel=1e-8)
    assert slow.likely_singular
    fast = grid_convergence(10.0 - 5.0 * h**2, h)
    assert fast.observed_order == pytest.approx(2.0, rel=1e-9)
    assert not fast.likely_singular
