"""Option checking shared by every command: argparse types with clear one-line messages, and the
check of output paths before any computing.

A bad option value is an argparse error: one line ``wheelreach CMD: error: argument --X: ...`` on
stderr and exit status 2, never a traceback. A bad output path (missing folder, a folder given as
the file) is one located line ``error: CMD --X PATH: ...`` and exit status 1, before the work starts.
The numeric limits come from core.bounds (the same ones the vehicle file obeys).
"""

from __future__ import annotations

import argparse
import math

from pydantic import ValidationError

from core.bounds import MAX_ANGLES_PER_TURN, MIN_ANGLES_PER_TURN
from core.vehicle import Spot

#: largest grid step any command accepts, m (a larger step than the region gives a single cell)
MAX_STEP_M = 5.0


class Parser(argparse.ArgumentParser):
    """An ArgumentParser whose usage errors are one line (the usage text is left to --help)."""

    def error(self, message: str):
        self.exit(2, f"{self.prog}: error: {message} (see '{self.prog} --help')\n")


def _number(text: str) -> float:
    try:
        x = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not math.isfinite(x):
        raise argparse.ArgumentTypeError(f"{text!r} is not a finite number")
    return x


def length(lo: float, hi: float, above: bool = False, what: str = "a length in m"):
    """argparse type: a finite length in m within [lo, hi] (or (lo, hi] when ``above``)."""

    def parse(text: str) -> float:
        x = _number(text)
        low_ok = x > lo if above else x >= lo
        if not (low_ok and x <= hi):
            rng = f"above {lo:g} and at most {hi:g}" if above else f"from {lo:g} to {hi:g}"
            raise argparse.ArgumentTypeError(f"must be {what} {rng}, not {text}")
        return x

    parse.__name__ = "length"  # argparse names the type in its own messages
    return parse


def step(text: str) -> float:
    """argparse type: a grid step in m, above 0 and at most MAX_STEP_M."""
    return length(0.0, MAX_STEP_M, above=True, what="a grid step in m")(text)


def count(lo: int, hi: int, what: str = "a whole number"):
    """argparse type: an integer within [lo, hi]."""

    def parse(text: str) -> int:
        try:
            n = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"must be {what} from {lo} to {hi}, not {text!r}") from None
        if not lo <= n <= hi:
            raise argparse.ArgumentTypeError(f"must be {what} from {lo} to {hi}, not {n}")
        return n

    parse.__name__ = "count"
    return parse


#: wheel angles per turn, with the same limits as the vehicle file's ``radio.angles_per_turn``
angles = count(MIN_ANGLES_PER_TURN, MAX_ANGLES_PER_TURN, "a number of angles per turn")


def spot(text: str) -> Spot:
    """argparse type: NAME=X,Y,Z in metres, vehicle axes, validated as a spot of the vehicle file."""
    name, sep, rest = text.partition("=")
    try:
        if not sep or not name:
            raise ValueError
        x, y, z = (float(p) for p in rest.split(","))
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"{text!r}: expected NAME=X,Y,Z in metres, e.g. 'console=-1.3,0,0.5'") from None
    try:
        return Spot(name=name, x_m=x, y_m=y, z_m=z)
    except ValidationError as e:  # non-finite or out-of-range coordinate, over-long name
        err = e.errors()[0]
        field = ".".join(str(p) for p in err["loc"])
        raise argparse.ArgumentTypeError(f"{text!r}: {field}: {err['msg']}") from None
