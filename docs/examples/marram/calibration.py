"""Field calibration: strain gauges on the pier and the survey clinometer."""
import math

GAUGE_FACTOR = 2.1  # foil strain gauge, from the data sheet


def strain_from_ratio(ratio: float) -> float:
    """Strain from the measured resistance ratio R/R0 of a loaded gauge."""
    # condhint: 1.00005 <= ratio <= 1.01, ratio +- 0.01%
    return (ratio - 1.0) / GAUGE_FACTOR


def buoy_distance(height: float, zenith: float) -> float:
    """Horizontal distance (m) to a buoy sighted from `height` m at zenith angle (rad)."""
    # condhint: 10 <= height <= 50, 1.5 <= zenith <= 1.5692, zenith ± 0.05%
    return height * math.tan(zenith)


def elapsed(t_start: float, t_end: float) -> float:
    """Seconds between a logger's deployment and its recovery."""
    # condhint: 0 <= t_start <= 3600, 86400 <= t_end <= 864000
    return t_end - t_start
