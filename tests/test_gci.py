"""Checks of elastofe.studies.gci."""

import math

import numpy as np
import pytest

from elastofe.studies.gci import (
    SAFETY_FACTOR,
    SAFETY_FACTOR_UNVERIFIED,
    assess_levels,
    grid_convergence,
    order_band,
    representative_size,
    triplet_order,
)


def test_celik_2008_table1_first_column():
    # Celik et al., J. Fluids Eng. 130 (2008) 078001, Table 1, first phi column (2-D, N = 18000, 8000,
    # 4500; phi = 6.063, 5.972, 5.863). The paper itself was not at hand: the inputs and the outputs
    # p = 1.53, phi_ext21 = 6.1685, GCI_fine21 = 2.17 %, GCI_fine32 = 4.11 % and the asymptotic ratio 1.015
    # are as printed by pyGCS (github.com/tomrobin-teschner/pyGCS, README and tests/test_GCI.py), which
    # reproduces this worked example of the paper; e_a21 = 1.5 % and e_ext21 = 1.7 % are from memory.
    h = representative_size([18000, 8000, 4500], dim=2, total_measure=76.0)
    res = grid_convergence([6.063, 5.972, 5.863], h)
    r21, r32 = res.refinement_ratios
    assert round(r21, 3) == 1.5 and round(r32, 3) == 1.333      # Table 1: r21 = 1.5, r32 = 1.333
    assert res.convergence == "monotonic"
    assert round(res.observed_order, 2) == 1.53                  # p = 1.53
    assert round(res.extrapolated, 4) == 6.1685                  # phi_ext21 = 6.1685
    assert round(100 * res.gci_fine, 2) == 2.17                  # GCI_fine21 = 2.17 % (paper: 2.2 %)
    assert round(100 * res.gci_fine_32, 2) == 4.11               # GCI_fine32 = 4.11 %
    assert round(res.asymptotic_ratio, 3) == 1.015               # GCI_32 / (r21^p GCI_21) = 1.015
    assert round(100 * res.approx_rel_error, 1) == 1.5           # e_a21 = 1.5 % (from memory)
    assert round(100 * res.extrap_rel_error, 1) == 1.7           # e_ext21 = 1.7 % (from memory)
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


# ------------------------------------------------------------------ assess_levels: the judgement on top
# Synthetic sequences: every expectation below follows from the construction of the sequence (an exact power
# law, an exact alternation, an exact growth law), not from a run of this code.

def test_noise_changes_of_either_sign_pattern_are_converged():
    # Changes within the noise tolerance give no order and no singular verdict whatever their signs.
    h = np.array([1.0, 1.5, 2.25])
    for f in ([10.0, 10.004, 9.998], [10.0, 10.004, 10.006], [10.0, 9.996, 9.990], [10.0, 10.0, 10.0]):
        a = assess_levels(f, h, noise=0.01, formal_order=2)
        assert a.verdict == "converged" and not a.singular
        assert math.isnan(a.observed_order) and a.asymptotic is None
        # two-level band with the formal order and Fs = 3 (Roache 1998), at least the noise wide
        half = max(SAFETY_FACTOR_UNVERIFIED * abs(f[0] - f[1]) / (1.5**2 - 1), 0.01)
        assert a.half_width == pytest.approx(half, rel=1e-12)


@pytest.mark.parametrize("p_true, formal", [(2.0, 2.0), (3.0, 3.0), (1.6, 2.0)])
def test_monotone_power_law_on_four_levels_is_asymptotic(p_true, formal):
    # f = f0 + C h^p on non-uniform ratios (1.32, 1.39, 1.41): every triplet has order p (Celik eq. 3 is
    # exact for a power law), Roache's ratio equals f_k / f_(k+1), and Richardson recovers f0 exactly.
    f0, C = 50.0, 4.0
    h = np.array([0.5, 0.66, 0.92, 1.3])
    f = f0 + C * h**p_true
    a = assess_levels(f, h, noise=1e-9, formal_order=formal)
    assert a.verdict == "monotonic" and a.asymptotic is True
    assert [t.order for t in a.triplets] == pytest.approx([p_true, p_true], rel=1e-9)
    assert a.order_used == pytest.approx(p_true, rel=1e-9) and a.safety_factor == SAFETY_FACTOR
    assert a.extrapolated == pytest.approx(f0, rel=1e-12)
    assert a.roache_ratios == pytest.approx((f[0] / f[1], f[1] / f[2]), rel=1e-9)
    assert a.half_width == pytest.approx(1.25 * abs(f[0] - f0), rel=1e-9)  # GCI = Fs |f1 - f_exact| (exact law)


def test_three_levels_cannot_show_the_asymptotic_range():
    # With three levels the one order is fitted to the three values: Roache's check is then |f1/f2| for any
    # values (see GridConvergence), so the range is reported as not shown rather than as reached.
    h = np.array([1.0, 1.5, 2.25])
    a = assess_levels(5.0 + h**2, h, noise=1e-9, formal_order=2)
    assert a.verdict == "monotonic" and a.asymptotic is None and "fourth level" in a.asymptotic_reason
    assert a.safety_factor == SAFETY_FACTOR


def test_oscillatory_sequence_gets_fs3_and_holds_the_limit():
    # f_k = f0 + C (-1)^k h_k^2: the swing shrinks at order 2; Celik's s = -1 equation recovers 2 exactly.
    f0, C = 20.0, 0.5
    h = np.array([1.0, 1.4, 1.96])
    f = f0 + C * np.array([1, -1, 1]) * h**2
    a = assess_levels(f, h, noise=1e-9, formal_order=2)
    assert a.verdict == "oscillatory" and a.observed_order == pytest.approx(2.0, rel=1e-9)
    assert a.safety_factor == SAFETY_FACTOR_UNVERIFIED
    assert f[0] - a.half_width <= f0 <= f[0] + a.half_width


@pytest.mark.parametrize("alpha", [0.5, 0.456])
def test_power_growth_is_singular_with_its_exponent(alpha):
    # Stress at a re-entrant corner grows like h^(lambda - 1) (Williams, J. Appl. Mech. 19, 1952; 0.456 for
    # a 270-degree corner): divergent, every step above the growth tolerance -> singular, exponent = alpha.
    h = np.array([0.3, 0.45, 0.7, 1.0])
    a = assess_levels(100.0 * h**-alpha, h, noise=0.05, formal_order=2)
    assert a.verdict == "singular" and a.singular and a.asymptotic is False
    assert a.growth_exponent == pytest.approx(alpha, rel=1e-9)
    assert math.isnan(a.half_width)


def test_logarithmic_growth_is_singular_with_exponent_zero():
    # f = 5 - ln h at a constant ratio: equal changes, signed order 0 (Celik eq. 3 without |.|).
    h = np.array([0.1, 0.2, 0.4])
    a = assess_levels(5.0 - np.log(h), h, noise=1e-3, formal_order=2)
    assert a.verdict == "singular" and a.growth_exponent == pytest.approx(0.0, abs=1e-9)


def test_small_growth_is_not_singular():
    # The same h^-0.5 law scaled to grow by 0.2 % per step stays below the 0.5 % growth tolerance: the two
    # small changes say "not settled", not singular and not divergent.
    h = np.array([0.5, 0.75, 1.125])
    f = 1000.0 + 2.0 * h**-0.5
    a = assess_levels(f, h, noise=0.1, formal_order=2, growth_tol=0.005)
    assert not a.singular and a.verdict == "not settled"


def test_four_levels_with_one_bad_triplet_are_not_asymptotic():
    # Finest triplet an exact order-2 law; the coarsest value chosen so that the coarse triplet has order
    # -1.18 (as in the report): the study is not asymptotic, the band falls back to Fs = 3.
    h = np.array([1.0, 1.5, 2.25, 3.375])
    f = list(10.0 + 0.01 * h[:3] ** 2)
    e21 = f[2] - f[1]                               # change between levels 2 and 3 (fine-to-coarse indices)
    e32 = e21 * 1.5 ** -1.18                        # constant ratio: p = ln(e32/e21) / ln r = -1.18
    f.append(f[2] + e32)
    assert triplet_order(f[1], f[2], f[3], 1.5, 1.5) == ("divergent", pytest.approx(-1.18, rel=1e-9))
    a = assess_levels(f, h, noise=1e-9, formal_order=2)
    assert a.verdict == "monotonic" and a.observed_order == pytest.approx(2.0, rel=1e-9)
    assert a.asymptotic is False and "levels 2-4" in a.asymptotic_reason   # Celik's numbering: 1 = finest
    assert a.safety_factor == SAFETY_FACTOR_UNVERIFIED


def test_implausible_order_is_bounded_so_the_band_holds_a_finer_value():
    # The net-section stress concentration: the finest value 2.2604 with a Celik band of
    # 2.2597-2.2610 (observed order 6.75 on ratios of 1.35, reconstructed here) excluded 2.26145, the value a
    # finer independent solve reached. With the order capped at the formal 2 the band is 2.2552-2.2656
    # (Fs = 1.25, the figures) and contains it; with Fs = 3 for an implausible order, more so.
    r, p, f1 = 1.35, 6.75, 2.2604
    e21 = 0.00065 * (r**p - 1.0) / 1.25
    f = [f1, f1 - e21, f1 - e21 - e21 * r**p]
    h = np.array([1.0, r, r * r])
    celik = grid_convergence(f, h)
    assert celik.observed_order == pytest.approx(6.75, rel=1e-9)
    assert not (f1 - celik.gci_fine * f1 <= 2.26145 <= f1 + celik.gci_fine * f1)
    assert f1 - 1.25 * e21 / (r**2 - 1) == pytest.approx(2.2552, abs=5e-5)   # the capped band
    assert f1 + 1.25 * e21 / (r**2 - 1) == pytest.approx(2.2656, abs=5e-5)
    a = assess_levels(f, h, noise=1e-5, formal_order=2)
    assert a.order_used == 2.0 and a.safety_factor == SAFETY_FACTOR_UNVERIFIED and a.order_plausible is False
    assert a.asymptotic is False             # three levels cannot show the range, but this order refutes it
    assert f1 - a.half_width <= 2.26145 <= f1 + a.half_width


def test_order_band():
    # Plausible band [formal/2, formal + 1] (our own): 10-node stress 2 -> 1..3, displacement 3 -> 1.5..4.
    assert order_band(2.0) == (1.0, 3.0) and order_band(3.0) == (1.5, 4.0) and order_band(1.0) == (0.5, 2.0)


def test_a_tiny_step_after_a_large_one_keeps_a_band_from_the_large_one():
    # A large change then one within the noise: converged, but the band covers the change the formal order
    # predicts for the finest step from the one before (|d1| / r^p).
    h = np.array([1.0, 1.5, 2.25])
    f = [10.0, 10.001, 9.0]
    a = assess_levels(f, h, noise=0.01, formal_order=2)
    assert a.verdict == "converged"
    assert a.half_width == pytest.approx(abs(10.001 - 9.0) / 1.5**2, rel=1e-12)


def test_small_ratio_does_not_verify_the_order():
    # Celik et al. 2008 recommend ratios above 1.3: an exact order-2 law on ratios of 1.1 gets Fs = 3.
    h = np.array([1.0, 1.1, 1.21])
    a = assess_levels(3.0 + h**2, h, noise=1e-9, formal_order=2)
    assert a.observed_order == pytest.approx(2.0, rel=1e-9) and a.safety_factor == SAFETY_FACTOR_UNVERIFIED
