"""HiGHS helpers shared by the solver front ends."""

from __future__ import annotations

import os
import sys

_BANNER_SHOWN = False


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
