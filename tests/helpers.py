"""Small helpers shared by the test modules."""

from __future__ import annotations

import numpy as np


def assert_close(actual, expected, atol: float, what: str) -> None:
    """Fail with a readable message unless ``|actual - expected| <= atol`` everywhere.

    Parameters
    ----------
    actual, expected : float or array_like
        Values to compare (same shape).
    atol : float
        Absolute tolerance.
    what : str
        What is compared and against which reference, used in the failure message.
    """
    a = np.asarray(actual, dtype=float)
    e = np.asarray(expected, dtype=float)
    if a.shape != e.shape:
        raise AssertionError(f"{what}: shape {a.shape} differs from the reference's {e.shape}")
    diff = np.abs(a - e)
    if not np.all(np.isfinite(a)) or np.any(diff > atol):
        worst = int(np.nanargmax(np.where(np.isfinite(diff), diff, np.inf))) if diff.size else 0
        raise AssertionError(
            f"{what}: max |difference| {np.nanmax(diff) if diff.size else float('nan'):.3g} "
            f"exceeds {atol:g} (at flat index {worst}: got {a.flat[worst]!r}, "
            f"reference {e.flat[worst]!r})"
        )
