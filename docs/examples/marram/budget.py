"""The lab's equipment reserve fund: interest and budget variance."""


def future_value(principal: float, rate: float, n: float, years: float) -> float:
    """Value of the reserve after `years` at nominal `rate` compounded n times a year."""
    # condhint: 1e3 <= principal <= 1e7, 0.001 <= rate <= 0.1
    # condhint: 1e3 <= n <= 1e9, 1 <= years <= 30
    return principal * (1 + rate / n) ** (n * years)


def budget_variance(actual: float, planned: float) -> float:
    """Relative overspend of an account (amounts are exact, in currency units)."""
    # condhint: 9.99e5 <= actual <= 1.001e6, 9.99e5 <= planned <= 1.001e6
    if planned <= 0:
        raise ValueError("planned amount must be positive")
    return actual / planned - 1


def statement_effective_rate(rate: float) -> float:
    """Effective annual rate of monthly compounding, exactly as the bank's statement."""
    # condhint: 1e-6 <= rate <= 0.1
    return (1 + rate / 12) ** 12 - 1  # condhint: ignore[CH101]
