"""Region edits of the GUI (app/edits.py, pure functions): add and delete mounting regions."""

from __future__ import annotations

from pathlib import Path

import pytest

from app.gui import edits
from core.vehicle import VehicleFileError, load_vehicle

SEDAN = Path(__file__).resolve().parents[1] / "sample_vehicles" / "sedan.json"


@pytest.mark.parametrize("view", ["top", "side"])
def test_add_region_makes_a_valid_region_inside_the_body_box(view):
    v = load_vehicle(SEDAN)
    w = edits.add_region(v, view)
    assert len(w.regions) == len(v.regions) + 1
    r = w.regions[-1]
    assert r.view == view and r.name not in {x.name for x in v.regions}
    outline = v.body.top_outline if view == "top" else v.body.side_outline
    xs = [p[0] for p in outline]
    assert min(xs) < min(p[0] for p in r.outline) < max(p[0] for p in r.outline) < max(xs)
    if view == "top":
        assert r.height_m == pytest.approx(round(v.floor_height() + 0.25, 3))
    else:
        assert r.lateral_m == 0.0


def test_delete_region_removes_only_that_region():
    v = load_vehicle(SEDAN)
    w = edits.delete_region(v, 0)
    assert [r.name for r in w.regions] == [r.name for r in v.regions[1:]]


def test_region_names_stay_unique_when_added_twice():
    v = edits.add_region(edits.add_region(load_vehicle(SEDAN), "top"), "top")
    names = [r.name for r in v.regions]
    assert len(names) == len(set(names))


def test_deleting_a_missing_region_is_refused():
    v = load_vehicle(SEDAN)
    with pytest.raises((IndexError, VehicleFileError)):
        edits.delete_region(v, 99)
