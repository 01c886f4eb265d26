"""Step machinery of the rigid-body optimiser without any quantum calculation: the SR1
Hessian update and the cubic that sets the trust radius after a poor step."""

from __future__ import annotations

import numpy as np
import pytest

from interkit.run.optimise import MIN_CURVATURE_KCAL_PER_MOL_PER_ANGSTROM2, _cubic_fraction, _sr1_update


def test_sr1_recovers_the_hessian_of_a_quadratic_in_six_steps():
    # Nocedal & Wright, Numerical Optimization, 2nd ed., Theorem 6.1: on a quadratic with
    # Hessian A, SR1 from n linearly independent steps gives H = A exactly. Starting from
    # 30 I > A keeps every H - A positive semidefinite, so the eigenvalue floor never acts.
    rng = np.random.default_rng(7)
    q, _ = np.linalg.qr(rng.normal(size=(6, 6)))
    a = q @ np.diag([0.5, 0.8, 1.5, 4.0, 12.0, 20.0]) @ q.T
    h = 30.0 * np.eye(6)
    for s in rng.normal(size=(6, 6)):
        h = _sr1_update(h, s, a @ s)
    np.testing.assert_allclose(h, a, atol=1e-8)


def test_sr1_update_keeps_the_curvature_floor():
    # a gradient change that says "negative curvature" along s: the updated Hessian keeps
    # every |eigenvalue| >= the documented floor, so trust-region steps stay downhill
    h = np.eye(6)
    s = np.eye(6)[0]
    h2 = _sr1_update(h, s, -5.0 * s)
    vals = np.linalg.eigvalsh(h2)
    assert vals.min() >= MIN_CURVATURE_KCAL_PER_MOL_PER_ANGSTROM2 - 1e-12
    # SR1 alone would give curvature -5 along s (h + r r^T / r.s, r = y - h s = -6 s); kept as |-5|
    np.testing.assert_allclose(h2 @ s, 5.0 * s, atol=1e-12)
    np.testing.assert_allclose(h2[1:, 1:], np.eye(5), atol=1e-12)


def test_cubic_fraction_finds_the_minimum_of_a_cubic():
    # e(t) = (t - 0.3)^2 (t + 1): local minimum at t = 0.3 (worked by hand:
    # e(0) = 0.09, e(1) = 0.98, e'(0) = -0.51, e'(1) = 3.29)
    assert _cubic_fraction(0.09, 0.98, -0.51, 3.29) == pytest.approx(0.3, abs=1e-12)
    # a quadratic e(t) = (t - 0.6)^2: minimum at 0.6 (the cubic term vanishes)
    assert _cubic_fraction(0.36, 0.16, -1.2, 0.8) == pytest.approx(0.6, abs=1e-12)
    # e(t) = (t - 0.02)^2: the minimum lies below the lower clip 0.1
    assert _cubic_fraction(0.0004, 0.9604, -0.04, 1.96) == pytest.approx(0.1)


def test_line_minimum_between_the_ends_beyond_the_end_or_none():
    from interkit.run.optimise import _line_minimum

    # overshoot: e(t) = (t - 0.3)^2 (t + 1) as above, minimum at 0.3 (worked by hand)
    assert _line_minimum(0.09, 0.98, -0.51, 3.29) == pytest.approx(0.3, abs=1e-12)
    # still falling at the end: e(t) = (t - 1.3)^2, minimum 0.3 of a step beyond (by hand:
    # e(0) = 1.69, e(1) = 0.09, e'(0) = -2.6, e'(1) = -0.6)
    assert _line_minimum(1.69, 0.09, -2.6, -0.6) == pytest.approx(1.3, abs=1e-12)
    # e(t) = (t - 1.05)^2: within 0.1 of the end, the step's own end point is kept
    assert _line_minimum(1.1025, 0.0025, -2.1, -0.1) is None
    # uphill at the start: no line minimum to use
    assert _line_minimum(0.0, 1.0, 0.5, 1.5) is None
