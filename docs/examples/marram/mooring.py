"""Mooring and culvert geometry at the tide-gauge station."""
from math import cos, sin, sqrt

import numpy as np

G = 9.80665  # standard gravity, m/s^2
RHO_SEA = 1025.0  # typical sea-water density, kg/m^3


def buoy_dip(tether: float, theta: float) -> float:
    """How far a buoy on a taut tether is pulled down when the current leans it by theta."""
    # condhint: 1 <= tether <= 100
    assert 0 < theta < 0.01
    return tether * (1 - cos(theta))


def wetted_area(radius: float, theta: float) -> float:
    """Water cross-section (m^2) of a nearly empty culvert; theta is the central angle."""
    # condhint: 0.1 <= radius <= 2
    if theta <= 0 or theta > 0.01:
        raise ValueError("only the nearly empty regime is modelled")
    return 0.5 * radius * radius * (theta - sin(theta))


def buoyancy(volume: float) -> float:
    """Buoyant force (N) on a fully submerged float of the given volume (m^3)."""
    # condhint: 1e-3 <= volume <= 10
    return RHO_SEA * G * volume


def drift_speed(u: float, v: float) -> float:
    """Drift speed (m/s) from the east and north current components."""
    # condhint: -3 <= u <= 3, -3 <= v <= 3
    return np.hypot(u, v)


def raw_magnitude(x: float, y: float) -> float:
    """Magnitude of a two-axis raw reading in whatever units the logger used."""
    # condhint: 1e-200 <= x <= 1e200, 1e-200 <= y <= 1e200
    return sqrt(x * x + y * y)
