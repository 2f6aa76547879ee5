"""Links whose geometry stays while material losses, the sensor EIRP and the null floor change.

A fit of the model to measurements (core.calibration) evaluates the same links hundreds of times
with other parameter values. Everything that does not depend on them is computed once here, with
the engine's own functions (core.links.link_rays, core.geometry.body_paths, the knife-edge wheel's
parts of core.links):

- the rays (directions, lengths, antenna and polarization coupling, the road's Fresnel coefficients
  and the reflected ray's phase); the sensor field of the installed wheel pattern, the costliest
  part of a link, is looked up once;
- which panels every ray leg crosses and the knife edge over every passage through the hull, traced
  once on the vehicle's hull built with material numbers in place of losses (core.scoring.vehicle_hull),
  so each crossing knows its material;
- the rim knife-edge loss and whether the path leaves the tire through the tread.

An evaluation then only sums the crossings' losses (the smaller of penetration and knife edge on
each passage, as core.geometry.body_loss_db), adds the tire's exit loss, combines the rays
(core.links.LinkRays.field, null floor included), adds the cabin's diffuse field and its fade
(core.links.with_cavity) and the EIRP offset: the same arithmetic as the engine, so the levels equal
those of a Scene built from the vehicle with the same values (tests/test_calibration.py checks this
to 1e-9 dB). The cabin's diffuse field depends on the panel and tire losses (how much enters the
cabin through its openings): the cavity (core.cavity) is rebuilt for each set of losses evaluated,
kept for the last few sets.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, replace

import numpy as np

from core.geometry import BodyPaths, body_paths, start_bits
from core.links import LinkRays, Ray, _wheel_groups, _wheel_losses, level_dbm, link_rays, sensor_states, with_cavity
from core.materials import material_loss_db
from core.scoring import Scene, vehicle_hull
from core.vehicle import UserMaterial

#: cavities kept per LinkTerms (a fit evaluates a handful of loss sets per step)
_CAVITIES_KEPT = 8


@dataclass(frozen=True, eq=False)
class LinkTerms:
    """N links (spot, wheel, wheel angle) of one scene, prepared for fast re-evaluation.

    ``materials``: the material names, by the number each crossing carries; ``base_loss_db`` their
    losses in the scene (dB). ``legs``: the body crossings of the direct ray, and of the road ray's
    two legs (sensor -> road, receiver -> road) when the road reflection is on. ``wheel_parts``:
    (rim knife-edge loss dB, leaves through the tread) of the direct and the road ray, for the
    knife-edge wheel; None with the installed wheel pattern (which holds the rim and tire already).
    """

    scene: Scene
    rays: LinkRays
    materials: tuple[str, ...]
    base_loss_db: np.ndarray
    legs: tuple[tuple[BodyPaths, np.ndarray], ...]  # (crossings, material number of each crossing)
    wheel_parts: tuple[tuple[np.ndarray, np.ndarray], ...] | None
    wheel: np.ndarray
    theta: np.ndarray
    spots: np.ndarray
    axes: np.ndarray
    _cavities: dict = field(default_factory=dict)

    @classmethod
    def build(cls, scene: Scene, wheel: np.ndarray, theta: np.ndarray, spots: np.ndarray,
              axes: np.ndarray) -> LinkTerms:
        """Prepare links: ``wheel`` (N,) wheel indices, ``theta`` (N,) wheel angles (rad), ``spots`` and
        ``axes`` (N, 3) receiver positions (m) and unit antenna axes."""
        wheel = np.asarray(wheel, int)
        theta = np.asarray(theta, float)
        spots = np.asarray(spots, float).reshape(-1, 3)
        axes = np.asarray(axes, float).reshape(-1, 3)
        src, s_axis, bits0 = sensor_states(scene, wheel, theta)
        road = scene.ground_reflection
        spot_bits = start_bits(scene.hull, spots[:, 0], spots[:, 1], spots[:, 2]) if road else None
        rays = link_rays(scene, wheel, theta, src, s_axis, bits0, spots, axes, spot_bits, detail=road)
        v = scene.vehicle
        number: dict[str, int] = {}

        def material_number(name: str) -> float:
            return float(number.setdefault(name, len(number)))

        coded = vehicle_hull(v, scene.wheels, material_number)
        overrides = {name: m.loss_db for name, m in v.materials.items()}
        materials = tuple(number)
        base = np.array([float(material_loss_db(name, scene.freq_hz, overrides)) for name in materials])
        f = scene.freq_hz
        paths = [body_paths(coded, src, spots, f, bits0)]
        g_pt = rays.road_detail.point if road else None
        if road:
            paths += [body_paths(coded, src, g_pt, f, bits0), body_paths(coded, spots, g_pt, f, spot_bits)]
        legs = tuple((p, p.loss_db.astype(int)) for p in paths)
        parts = None
        if scene.use_wheel_loss:
            groups = _wheel_groups(wheel, len(src))
            ends = (spots, g_pt) if road else (spots,)
            parts = tuple((w.rim_db, w.through_tread) for w in
                          (_wheel_losses(scene, groups, src, end, detail=True) for end in ends))
        return cls(scene, rays, materials, base, legs, parts, wheel, theta, spots, axes)

    def __len__(self) -> int:
        return len(self.rays.direct.d)

    def material_losses(self, material_loss_db: Mapping[str, float] | None = None) -> np.ndarray:
        """The loss of every material number, dB: the scene's, with ``material_loss_db`` (name -> dB) in
        place of the named ones (names the body does not use are ignored)."""
        loss = self.base_loss_db.copy()
        for name, value in (material_loss_db or {}).items():
            if name in self.materials:
                loss[self.materials.index(name)] = float(value)
        return loss

    def ray_losses(self, material_loss_db: Mapping[str, float] | None = None,
                   tread_loss_db: float | None = None) -> tuple[np.ndarray, np.ndarray | None]:
        """Losses of the direct and the road ray (None without it), dB, as core.links.link_rays computes
        them, with the given material losses and tire tread loss (None: the scene's)."""
        mat = self.material_losses(material_loss_db)
        body = [paths.total_db(mat[numbers]) for paths, numbers in self.legs]
        loss_d = body[0]
        loss_r = body[1] + body[2] if len(body) == 3 else None
        if self.wheel_parts is not None:
            sc = self.scene
            tread = sc.tread_loss_db if tread_loss_db is None else float(tread_loss_db)
            rim_d, tread_d = self.wheel_parts[0]
            loss_d = loss_d + (rim_d + np.where(tread_d, tread, sc.sidewall_loss_db))
            if loss_r is not None:
                rim_r, tread_r = self.wheel_parts[1]
                loss_r = loss_r + (rim_r + np.where(tread_r, tread, sc.sidewall_loss_db))
        return loss_d, loss_r

    def levels_dbm(self, material_loss_db: Mapping[str, float] | None = None, tread_loss_db: float | None = None,
                   null_floor_db: float | None = None, eirp_offset_db: float = 0.0) -> np.ndarray:
        """Received level of every link, dBm (the scene's values where an argument is None)."""
        loss_d, loss_r = self.ray_losses(material_loss_db, tread_loss_db)
        floor = self.scene.null_floor_db if null_floor_db is None else float(null_floor_db)
        r = self.rays
        rays = replace(r, direct=Ray(r.direct.d, r.direct.c, loss_d), floor_ratio=10.0 ** (floor / 10.0),
                       road=None if r.road is None else Ray(r.road.d, r.road.c, loss_r))
        f = with_cavity(self._cavity_scene(material_loss_db, tread_loss_db), rays.field(), self.wheel, self.theta,
                        self.spots, self.axes)
        return level_dbm(self.scene, f.power()) + eirp_offset_db

    def _cavity_scene(self, material_loss_db: Mapping[str, float] | None, tread_loss_db: float | None):
        """The scene whose cabin field goes with these losses: the scene itself at its own values, else a scene
        of the vehicle with the losses set (its cavity rebuilt by core.scoring), the last few kept."""
        sc = self.scene
        if getattr(sc, "cavity", None) is None:
            return sc
        mat = self.material_losses(material_loss_db)
        tread = sc.tread_loss_db if tread_loss_db is None else float(tread_loss_db)
        if np.array_equal(mat, self.base_loss_db) and tread == sc.tread_loss_db:
            return sc
        key = (mat.tobytes(), tread)
        hit = self._cavities.get(key)
        if hit is None:
            v = sc.vehicle
            mats = dict(v.materials)
            for name, loss in zip(self.materials, mat):
                desc = mats[name].description if name in mats else ""
                mats[name] = UserMaterial(loss_db=float(loss), description=desc)
            if tread != sc.tread_loss_db:
                desc = mats["tire_tread"].description if "tire_tread" in mats else ""
                mats["tire_tread"] = UserMaterial(loss_db=tread, description=desc)
            hit = Scene.from_vehicle(v.model_copy(update={"materials": mats}))
            if len(self._cavities) >= _CAVITIES_KEPT:
                self._cavities.pop(next(iter(self._cavities)))
            self._cavities[key] = hit
        return hit


__all__ = ["LinkTerms"]
