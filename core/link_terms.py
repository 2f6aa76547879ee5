"""Links whose geometry stays while material losses, the sensor EIRP and the null floor change.

A fit of the model to measurements (core.calibration) evaluates the same links hundreds of times
with other parameter values. Everything that does not depend on them is computed once here, with
the engine's own functions (core.links.link_rays, core.geometry.body_paths,
core.links.wheel_loss_parts):

- the rays (directions, lengths, antenna and polarization coupling, the road's Fresnel coefficients
  and the reflected ray's phase); the sensor field of the installed wheel pattern, the costliest
  part of a link, is looked up once;
- which panels every ray leg crosses and the knife edge over every passage through the hull, traced
  once on the vehicle's hull built with material numbers in place of losses (core.scoring.vehicle_hull),
  so each crossing knows its material;
- the rim knife-edge loss and whether the path leaves the tire through the tread.

An evaluation then only sums the crossings' losses (the smaller of penetration and knife edge on
each passage, as core.geometry.body_loss_db), adds the tire's exit loss, combines the rays
(core.links.combine_rays, null floor included) and adds the EIRP offset: the same arithmetic as the
engine, so the levels equal those of a Scene built from the vehicle with the same values
(tests/test_calibration.py checks this to 1e-9 dB).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from core.geometry import BodyPaths, body_paths, start_bits
from core.links import Rays, combine_rays, level_dbm, link_rays, wheel_loss_parts
from core.materials import material_loss_db
from core.scoring import Scene, vehicle_hull
from core.wheel import sensor_axes, sensor_positions


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
    rays: Rays
    materials: tuple[str, ...]
    base_loss_db: np.ndarray
    legs: tuple[tuple[BodyPaths, np.ndarray], ...]  # (crossings, material number of each crossing)
    wheel_parts: tuple[tuple[np.ndarray, np.ndarray], ...] | None

    @classmethod
    def build(cls, scene: Scene, wheel: np.ndarray, theta: np.ndarray, spots: np.ndarray,
              axes: np.ndarray) -> LinkTerms:
        """Prepare links: ``wheel`` (N,) wheel indices, ``theta`` (N,) wheel angles (rad), ``spots`` and
        ``axes`` (N, 3) receiver positions (m) and unit antenna axes."""
        wheel = np.asarray(wheel, int)
        theta = np.asarray(theta, float)
        spots = np.asarray(spots, float).reshape(-1, 3)
        axes = np.asarray(axes, float).reshape(-1, 3)
        src = np.empty((len(theta), 3))
        for wi, w in enumerate(scene.wheels):
            g = wheel == wi
            if g.any():
                src[g] = sensor_positions(w, theta[g])
        s_axis = sensor_axes(theta, scene.vehicle.radio.sensor.axis)
        bits0 = start_bits(scene.hull, src[:, 0], src[:, 1], src[:, 2])
        rays = link_rays(scene, wheel, theta, src, s_axis, bits0, spots, axes)
        v = scene.vehicle
        number: dict[str, int] = {}

        def material_number(name: str) -> float:
            return float(number.setdefault(name, len(number)))

        coded = vehicle_hull(v, scene.wheels, material_number)
        overrides = {name: m.loss_db for name, m in v.materials.items()}
        materials = tuple(number)
        base = np.array([float(material_loss_db(name, scene.freq_hz, overrides)) for name in materials])
        f = scene.freq_hz
        paths = [body_paths(coded, rays.src, rays.dst, f, rays.bits0)]
        if rays.road:
            paths += [body_paths(coded, rays.src, rays.g_pt, f, rays.bits0),
                      body_paths(coded, rays.dst, rays.g_pt, f, rays.spot_bits)]
        legs = tuple((p, p.loss_db.astype(int)) for p in paths)
        parts = None
        if scene.use_wheel_loss:
            parts = (wheel_loss_parts(scene, rays.groups, rays.src, rays.dst),)
            if rays.road:
                parts += (wheel_loss_parts(scene, rays.groups, rays.src, rays.g_pt),)
        return cls(scene, rays, materials, base, legs, parts)

    def __len__(self) -> int:
        return len(self.rays.d)

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
        """Losses of the direct and the road ray (None without it), dB, as core.links.ray_losses with the
        given material losses and tire tread loss (None: the scene's)."""
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
        field = combine_rays(self.rays, loss_d, loss_r, floor)
        return level_dbm(self.scene, field.power()) + eirp_offset_db


__all__ = ["LinkTerms"]
