"""Pure run mass balance: per element, input − product − waste − losses = unaccounted.

No Flask, no database, no I/O; the store turns a run's draws, outputs, waste entries and
declared losses into :class:`Flow` values and passes the site tolerance.
"""

from service.balance.flows import KINDS, PRODUCT_METHODS, BalanceError, DuplicateByDifferenceError, Flow
from service.balance.runs import ElementBalance, RunBalance, WasteShare, run_balance

__all__ = [
    "BalanceError",
    "DuplicateByDifferenceError",
    "ElementBalance",
    "Flow",
    "KINDS",
    "PRODUCT_METHODS",
    "RunBalance",
    "WasteShare",
    "run_balance",
]
