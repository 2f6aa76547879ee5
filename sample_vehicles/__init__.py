"""The bundled sample vehicles (invented demo bodies), installed as the package ``core.samples``.

This folder is mapped to ``core.samples`` in pyproject.toml, so the same files are found from a
source checkout, an editable install and a regular install.
"""

from __future__ import annotations

from pathlib import Path

#: the folder holding the sample vehicle files
SAMPLES_DIR = Path(__file__).resolve().parent
#: the sample opened when the program starts without a file
DEFAULT_SAMPLE = SAMPLES_DIR / "sedan.json"


def sample_paths() -> list[Path]:
    """The sample vehicle files, sorted by name."""
    return sorted(SAMPLES_DIR.glob("*.json"))
