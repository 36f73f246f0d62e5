"""Values of the counting, mooring, chemistry and calibration helpers at moderate inputs.

Reference: mpmath at 50 digits on the same exact double inputs, or numpy's accurate
functions. Tolerances hold for the naive formulas and for any stable rewrite of them.
"""
import math
import statistics

import mpmath
import numpy as np
import pytest

from marram import calibration, chemistry, counting, mooring

mpmath.mp.dps = 50
REL = 1e-9  # moderate inputs: the naive formulas lose at most ~5 digits here


def close(got: float, want) -> bool:
    return float(abs((mpmath.mpf(float(got)) - want) / want)) <= REL


@pytest.mark.parametrize("n", [1.0, 37.5, 1e4])
def test_poisson_noise_step(n: float) -> None:
    m = mpmath.mpf(n)  # reference: mpmath at 50 digits
    assert close(counting.poisson_noise_step(n), mpmath.sqrt(m + 1) - mpmath.sqrt(m))


def test_poisson_noise_step_rejects_non_positive() -> None:
    with pytest.raises(ValueError):
        counting.poisson_noise_step(0.0)


@pytest.mark.parametrize("n", [2.0, 99.5, 1e4])
def test_weight_change(n: float) -> None:
    m = mpmath.mpf(n)  # reference: 1/(n(n+1)) in mpmath, algebraically equal
    assert close(counting.weight_change(n), 1 / (m * (m + 1)))


@pytest.mark.parametrize("x", [-50.0, -1.0, 0.5, 3.0, 200.0])
def test_asinh_counts(x: float) -> None:
    assert close(counting.asinh_counts(x), mpmath.asinh(x))  # DLMF ch. 4: asinh = log(x + sqrt(x^2+1))
    assert counting.asinh_counts(x) == pytest.approx(np.arcsinh(x), rel=REL)


@pytest.mark.parametrize("a,b", [(-20.0, -21.0), (-3.5, 2.0), (10.0, 10.0)])
def test_combined_log_likelihood(a: float, b: float) -> None:
    assert counting.combined_log_likelihood(a, b) == pytest.approx(np.logaddexp(a, b), rel=REL)


def test_total_volume_and_median_bin() -> None:
    args = (2e3, 15.0, 5.2e-19, 6.5e-15)
    assert counting.total_volume(*args) == pytest.approx(math.fsum([2e3 * 5.2e-19, 15.0 * 6.5e-15]), rel=1e-14)
    for n in range(1, 8):  # reference: statistics.median_low of the indices
        assert counting.median_bin([0] * n) == statistics.median_low(range(n))


@pytest.mark.parametrize("tether,theta", [(50.0, 0.008), (2.0, 0.0099)])
def test_buoy_dip(tether: float, theta: float) -> None:
    assert close(mooring.buoy_dip(tether, theta), tether * (1 - mpmath.cos(theta)))


def test_wetted_area() -> None:
    r, t = 1.2, 0.009
    assert close(mooring.wetted_area(r, t), mpmath.mpf(r) ** 2 / 2 * (t - mpmath.sin(t)))
    with pytest.raises(ValueError):
        mooring.wetted_area(r, 0.0)


def test_buoyancy_and_speeds() -> None:
    # 1025 kg/m^3 * 9.80665 m/s^2 (standard gravity, exact by definition) = 10051.81625 N per m^3
    assert mooring.buoyancy(1.0) == pytest.approx(10051.81625, rel=1e-14)
    assert mooring.drift_speed(0.3, -0.4) == pytest.approx(math.hypot(0.3, 0.4), rel=1e-15)
    assert mooring.raw_magnitude(3e100, 4e100) == pytest.approx(np.hypot(3e100, 4e100), rel=1e-14)
    assert mooring.raw_magnitude(1.5, 2.0) == pytest.approx(2.5, rel=1e-15)


@pytest.mark.parametrize("ka,conc", [(1.8e-5, 0.1), (1e-2, 1e-3), (1e-3, 1e-4)])
def test_hydrogen_ion(ka: float, conc: float) -> None:
    k, c = mpmath.mpf(ka), mpmath.mpf(conc)  # reference: positive root in mpmath
    assert close(chemistry.hydrogen_ion(ka, conc), (-k + mpmath.sqrt(k * k + 4 * k * c)) / 2)


def test_ph() -> None:
    assert chemistry.ph(1e-7) == pytest.approx(7.0, rel=1e-15)  # definition of pH


def test_strain_from_ratio() -> None:
    x = 1.002
    assert close(calibration.strain_from_ratio(x), (mpmath.mpf(x) - 1) / mpmath.mpf(2.1))


@pytest.mark.parametrize("zenith", [1.5, 1.56])
def test_buoy_distance(zenith: float) -> None:
    assert close(calibration.buoy_distance(30.0, zenith), 30 * mpmath.tan(zenith))


def test_elapsed() -> None:
    assert calibration.elapsed(1234.5, 90000.25) == 90000.25 - 1234.5 == 88765.75
