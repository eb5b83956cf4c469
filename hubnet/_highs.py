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


def column_lp(
    cost: np.ndarray,
    col_bounds: tuple[np.ndarray, np.ndarray],
    row_bounds: tuple[np.ndarray, np.ndarray],
    matrix: tuple[np.ndarray, np.ndarray, np.ndarray],
) -> Any:
    """A ``highspy.HighsLp`` from column-wise (CSC) arrays.

    ``matrix`` is ``(start, index, value)``: column j's entries are rows
    ``index[start[j]:start[j + 1]]`` with coefficients ``value[...]``.
    """
    import highspy

    start, index, value = matrix
    lp = highspy.HighsLp()
    lp.num_col_ = len(cost)
    lp.num_row_ = len(row_bounds[0])
    lp.col_cost_ = cost
    lp.col_lower_, lp.col_upper_ = col_bounds
    lp.row_lower_, lp.row_upper_ = row_bounds
    lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
    lp.a_matrix_.start_ = start
    lp.a_matrix_.index_ = index
    lp.a_matrix_.value_ = value
    return lp
