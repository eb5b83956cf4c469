"""HiGHS helpers shared by the solver front ends."""

from __future__ import annotations

import os
import sys
from typing import Any

import numpy as np

_BANNER_SHOWN = False
#: Threads HiGHS's process-wide pool was last sized for (0: HiGHS's default).
_POOL_THREADS: int | None = None


def silence_highs_banner() -> None:
    """Create one HiGHS object with stdout muted: HiGHS prints its banner once per process."""
    global _BANNER_SHOWN
    if _BANNER_SHOWN:
        return
    import highspy

    sys.stdout.flush()
    saved = os.dup(1)
    try:
        with open(os.devnull, "w") as null:
            os.dup2(null.fileno(), 1)
            highspy.Highs()
    finally:
        os.dup2(saved, 1)
        os.close(saved)
    _BANNER_SHOWN = True


def use_threads(threads: int | None) -> None:
    """Size HiGHS's thread pool for a solve that asks for ``threads`` (``None``: default).

    HiGHS keeps one thread pool per process, sized by the first run; a later
    run asking for a different number of threads fails at once (HiGHS 1.16:
    the solver returns an error and no solution). A notebook or a sweep
    worker solving one scenario with default threads and the next with
    ``threads = 1`` would hit that, so every solve calls this first: when
    the count differs from the pool's, the pool is restarted.
    """
    global _POOL_THREADS
    want = int(threads or 0)
    if _POOL_THREADS == want:
        return
    import highspy

    silence_highs_banner()
    highspy.Highs.resetGlobalScheduler(True)
    _POOL_THREADS = want


def quiet_highs(threads: int | None) -> Any:
    """A silent ``highspy.Highs`` asking for ``threads`` (``None``: HiGHS's default).

    Every HiGHS object of one solve must ask for the same number of threads
    as the pool was sized for (see :func:`use_threads`).
    """
    import highspy

    use_threads(threads)
    h = highspy.Highs()
    h.setOptionValue("output_flag", False)
    if threads:
        h.setOptionValue("threads", int(threads))
    return h


def pass_columns(
    h: Any,
    cost: np.ndarray,
    col_bounds: tuple[np.ndarray, np.ndarray],
    row_bounds: tuple[np.ndarray, np.ndarray],
    matrix: tuple[np.ndarray, np.ndarray, np.ndarray],
    integer: np.ndarray | None = None,
) -> None:
    """Give ``h`` a minimisation LP from column-wise (CSC) arrays.

    ``matrix`` is ``(start, index, value)``: column j's entries are rows
    ``index[start[j]:start[j + 1]]`` with coefficients ``value[...]``.
    ``integer``, a boolean per column, makes it a MIP. Costs, bounds and
    coefficients are in whatever units the caller's model uses (hubnet's:
    currency per day, shares and units per day).
    The arrays go to HiGHS as they are: filling a ``highspy.HighsLp`` field
    by field took 35 times longer (3.6 ms against 0.1 ms for a
    5,600-column LP), which was a sixth of a Benders run on 100 sites.
    """
    import highspy

    start, index, value = matrix
    n_col, n_row = len(cost), len(row_bounds[0])
    kinds = np.zeros(n_col, dtype=np.int32) if integer is None else np.asarray(integer, np.int32)
    if not (
        len(col_bounds[0]) == len(col_bounds[1]) == len(kinds) == n_col
        and len(row_bounds[1]) == n_row
        and len(start) in (n_col, n_col + 1)
        and len(index) == len(value) < 2**31
    ):
        raise ValueError("pass_columns: array lengths do not match the LP's columns and rows")
    status = h.passModel(
        n_col,
        n_row,
        len(value),
        int(highspy.MatrixFormat.kColwise),
        int(highspy.ObjSense.kMinimize),
        0.0,
        np.ascontiguousarray(cost, dtype=np.float64),
        np.ascontiguousarray(col_bounds[0], dtype=np.float64),
        np.ascontiguousarray(col_bounds[1], dtype=np.float64),
        np.ascontiguousarray(row_bounds[0], dtype=np.float64),
        np.ascontiguousarray(row_bounds[1], dtype=np.float64),
        np.ascontiguousarray(start[:n_col], dtype=np.int32),
        np.ascontiguousarray(index, dtype=np.int32),
        np.ascontiguousarray(value, dtype=np.float64),
        # One entry per column (0 continuous, 1 integer): an empty array is
        # read as garbage by HiGHS 1.16, not as "all continuous".
        kinds,
    )
    # kWarning is not a refusal: HiGHS drops matrix entries under 1e-9 (an
    # origin with a tiny volume) and says so.
    if status == highspy.HighsStatus.kError:
        raise RuntimeError(f"HiGHS refused the LP ({n_col} columns, {n_row} rows): {status}")
