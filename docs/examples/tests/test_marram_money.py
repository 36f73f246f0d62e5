"""Values of the growth and budget helpers at moderate inputs.

Reference: mpmath at 50 digits on the same exact double inputs, or numpy's expm1/log1p.
"""
import mpmath
import numpy as np
import pytest

from marram import budget, growth

mpmath.mp.dps = 50
REL = 1e-9


def close(got: float, want) -> bool:
    return float(abs((mpmath.mpf(float(got)) - want) / want)) <= REL


def test_specific_growth_rate() -> None:
    assert close(growth.specific_growth_rate(1e6, 2e6, 1.0), mpmath.log(2))
    n0, n1, dt = 1e6, 1.01e6, 0.5
    assert close(growth.specific_growth_rate(n0, n1, dt), mpmath.log(mpmath.mpf(n1) / n0) / dt)


@pytest.mark.parametrize("rate,dt", [(0.01, 1.0), (2e-3, 3.0)])
def test_fraction_grown(rate: float, dt: float) -> None:
    assert growth.fraction_grown(rate, dt) == pytest.approx(np.expm1(rate * dt), rel=REL)


@pytest.mark.parametrize("f", [0.01, 0.3, 2.0])
def test_continuous_rate(f: float) -> None:
    assert growth.continuous_rate(f) == pytest.approx(np.log1p(f), rel=REL)


def test_fraction_grown_checked_is_accurate_everywhere() -> None:
    # The guarded form must be good to a few ulps also where exp(x) - 1 would cancel.
    xs = np.concatenate([np.geomspace(1e-300, 30, 400), -np.geomspace(1e-300, 30, 400), [0.0, 1.0, -1.0]])
    for x in xs:
        want = mpmath.expm1(mpmath.mpf(float(x)))  # reference: mpmath expm1 at 50 digits
        got = growth.fraction_grown_checked(float(x))
        assert abs(mpmath.mpf(got) - want) <= 8e-16 * abs(want), x


def test_future_value() -> None:
    p, r, n, t = 1000.0, 0.05, 12.0, 10.0
    want = p * (1 + mpmath.mpf(r) / n) ** (n * t)  # reference: mpmath on exact inputs
    assert close(budget.future_value(p, r, n, t), want)
    # daily compounding approaches continuous compounding p*exp(r*t) (common practice)
    assert budget.future_value(p, r, 365.0, t) == pytest.approx(p * np.exp(r * t), rel=1e-4)


def test_budget_variance() -> None:
    assert close(budget.budget_variance(1050.0, 1000.0), mpmath.mpf(1050) / 1000 - 1)
    with pytest.raises(ValueError):
        budget.budget_variance(1.0, 0.0)


def test_statement_effective_rate() -> None:
    # 12 % nominal, monthly: 1.01**12 - 1 = 12.6825 % (standard finance exercise, from memory)
    assert budget.statement_effective_rate(0.12) == pytest.approx(0.126825030131969720, rel=1e-12)
    assert close(budget.statement_effective_rate(0.05), (1 + mpmath.mpf(0.05) / 12) ** 12 - 1)
