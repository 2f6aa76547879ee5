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
import os
from pathlib import Path

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


def output_problem(path: str | os.PathLike) -> str | None:
    """What stops a file being written at ``path`` (checked before computing), or None.

    Checks only what can be known without writing: the folder exists and is a folder, the path is
    not itself a folder, and the folder is writable. (Refusing an output that is one of the inputs
    is the output writer's job.)"""
    p = Path(path)
    folder = p.parent
    if str(path).endswith(os.sep) or p.is_dir():
        return "is a folder, not a file name"
    if not folder.exists():
        return f"the folder {str(folder)!r} does not exist"
    if not folder.is_dir():
        return f"{str(folder)!r} is not a folder"
    if not os.access(folder, os.W_OK | os.X_OK):
        return f"cannot write in the folder {str(folder)!r} (permission denied)"
    return None


def check_outputs(command: str, outputs: dict[str, str | None]) -> str | None:
    """The first bad output as one located line ``COMMAND OPTION PATH: problem``, or None.

    ``outputs`` maps an option name (``-o``, ``--csv``, ...) to its path or None when not given."""
    for option, path in outputs.items():
        if path:
            problem = output_problem(path)
            if problem:
                return f"{command} {option} {path}: {problem}"
    return None
