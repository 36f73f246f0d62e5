"""Former name of the operation registry, kept so that existing imports keep working.

The records live in `numeric.operations` (`OPERATIONS`, records of type `numeric.operation.Operation`).
"""
from condhint.numeric.operation import Operation as Fn
from condhint.numeric.operations import OPERATIONS as FUNCTIONS
from condhint.numeric.operations import _mp_pow

__all__ = ["FUNCTIONS", "Fn", "_mp_pow"]
