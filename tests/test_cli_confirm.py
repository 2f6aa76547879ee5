"""``wheelreach confirm`` without the fullwave extra: one line saying what to install, exit 1 (issue 16).

Runs without PyNEC or Dask (the rest of the command is tested in tests/validation/test_confirm.py).
"""

from __future__ import annotations

import importlib.util

from app.cli.main import main


def test_without_the_extra_confirm_says_what_to_install(tmp_path, monkeypatch, capsys):
    real = importlib.util.find_spec
    monkeypatch.setattr(importlib.util, "find_spec", lambda name, *a: None if name == "distributed" else real(name, *a))
    code = main(["confirm", str(tmp_path / "any.json")])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 1 and len(err) == 1
    assert "pip install 'wheelreach[fullwave]'" in err[0] and "dask[distributed]" in err[0]
