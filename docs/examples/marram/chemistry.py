"""Acidity of trace-acid samples (water's own ionisation is neglected)."""
import math


def hydrogen_ion(ka: float, conc: float) -> float:
    """[H+] (mol/L) of a weak acid of dissociation constant ka at concentration conc.

    Positive root of h*h + ka*h - ka*conc = 0, as in the lab's old worksheet.
    """
    # condhint: 1e-3 <= ka <= 1e-1, 1e-9 <= conc <= 1e-5
    a = 1.0
    b = ka
    c = -ka * conc
    disc = b * b - 4 * a * c
    return (-b + math.sqrt(disc)) / (2 * a)


def ph(h: float) -> float:
    """pH from the hydrogen-ion concentration."""
    # condhint: 1e-12 <= h <= 1e-2
    return -math.log10(h)
