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
to 1e-9 dB).

The cabin's diffuse field (core.cavity) depends on the losses in three ways: the power entering
through the openings (a sum over the sensor -> hull patch paths of their body and wheel losses,
times tau dA of every opening patch), which patches are openings at all and their tau (both
functions of the patch material's loss: a metal loss under 10 dB makes the metal an opening, a
glass loss over 10 dB makes the glass a wall), and the cross-section sigma_d (the leak through the
openings, the conducting wall area) with the wall factors near conducting panels. So the paths from
every wheel's sensor at the cavity's input angles to *every* hull patch (core.cavity.input_paths,
core.cavity.surface_samples) are traced once on the coded hull, like the rays; an evaluation re-sums
their losses, decides the openings and assembles the cavity with core.cavity.cavity_from (the
engine's own assembly), then the receivers' diffuse factor with core.cavity.diffuse_factor: a few
milliseconds, exact for any material losses.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace

import numpy as np

from core import cavity as cv
from core.geometry import BodyPaths, body_paths, inside_hull, start_bits
from core.links import LinkRays, Ray, _wheel_groups, _wheel_losses, level_dbm, link_rays, sensor_states, with_cavity
from core.materials import material_loss_db
from core.scoring import Scene, vehicle_hull


@dataclass(frozen=True, eq=False)
class CabinTerms:
    """The parts of the cabin's diffuse field that stay while the losses change (see the module notes).

    ``patches``: (centres, normals, areas) of every hull patch (core.cavity.surface_samples) and
    ``patch_material`` (P,) the material number of each; ``paths`` the sensor -> patch paths
    (core.cavity.InputPaths, to every patch) with their body crossings ``legs`` (direct; and the road
    ray's sensor -> road and patch -> road legs) and material numbers, and the knife-edge wheel's parts
    ``wheel_parts`` (rim loss dB, leaves through the tread) of the direct and road legs (None with the
    installed pattern); per link: ``inside`` (N,) the receiver is in the hull, ``wall`` (2, N) its wall
    factors and ``wall_material`` (2, N) the panel material behind each (core.cavity.wall_terms)."""

    patches: tuple[np.ndarray, np.ndarray, np.ndarray]
    patch_material: np.ndarray
    paths: cv.InputPaths
    legs: tuple[tuple[BodyPaths, np.ndarray], ...]
    wheel_parts: tuple[tuple[np.ndarray, np.ndarray], ...] | None
    inside: np.ndarray
    wall: np.ndarray
    wall_material: np.ndarray
    contents_m2: float


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
    cabin: CabinTerms | None = None

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
        cabin = None
        if getattr(scene, "cavity", None) is not None:
            cabin = _cabin_terms(scene, coded, spots, axes)
        return cls(scene, rays, materials, base, legs, parts, wheel, theta, spots, axes, cabin)

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

    def _tire(self, tread_loss_db: float | None, parts: tuple[np.ndarray, np.ndarray]) -> np.ndarray:
        """The knife-edge wheel's loss, dB: rim knife edge plus the tire exit (tread or sidewall loss)."""
        sc = self.scene
        tread = sc.tread_loss_db if tread_loss_db is None else float(tread_loss_db)
        rim, through_tread = parts
        return rim + np.where(through_tread, tread, sc.sidewall_loss_db)

    def _leg_losses(self, mat: np.ndarray, legs, wheel_parts, tread_loss_db) -> tuple[np.ndarray, np.ndarray | None]:
        """Losses of a direct ray and a road ray (None without it) from their legs' crossings, dB."""
        body = [paths.total_db(mat[numbers]) for paths, numbers in legs]
        loss_d = body[0]
        loss_r = body[1] + body[2] if len(body) == 3 else None
        if wheel_parts is not None:
            loss_d = loss_d + self._tire(tread_loss_db, wheel_parts[0])
            if loss_r is not None:
                loss_r = loss_r + self._tire(tread_loss_db, wheel_parts[1])
        return loss_d, loss_r

    def ray_losses(self, material_loss_db: Mapping[str, float] | None = None,
                   tread_loss_db: float | None = None) -> tuple[np.ndarray, np.ndarray | None]:
        """Losses of the direct and the road ray (None without it), dB, as core.links.link_rays computes
        them, with the given material losses and tire tread loss (None: the scene's)."""
        return self._leg_losses(self.material_losses(material_loss_db), self.legs, self.wheel_parts, tread_loss_db)

    def cavity(self, material_loss_db: Mapping[str, float] | None = None, tread_loss_db: float | None = None):
        """(core.cavity.Cavity, diffuse factor (N,) of the receivers) with these losses, as core.scoring builds
        them for a vehicle with these values (None, None without a cavity)."""
        cab = self.cabin
        if cab is None:
            return None, None
        mat = self.material_losses(material_loss_db)
        loss_d, loss_r = self._leg_losses(mat, cab.legs, cab.wheel_parts, tread_loss_db)
        sc = self.scene
        cav = cv.cavity_from(cab.patches, mat[cab.patch_material], cab.paths, np.arange(len(cab.patch_material)),
                             loss_d, loss_r, cab.contents_m2, sc.freq_hz, sc.wavelength_m, sc.cavity.input_angles)
        wall = cv.combine_wall_factors(cab.wall, mat[cab.wall_material])
        return cav, cv.diffuse_factor(cab.inside, wall, cav.sigma_total_m2, sc.receiver_pattern == "dipole")

    def levels_dbm(self, material_loss_db: Mapping[str, float] | None = None, tread_loss_db: float | None = None,
                   null_floor_db: float | None = None, eirp_offset_db: float = 0.0) -> np.ndarray:
        """Received level of every link, dBm (the scene's values where an argument is None)."""
        loss_d, loss_r = self.ray_losses(material_loss_db, tread_loss_db)
        floor = self.scene.null_floor_db if null_floor_db is None else float(null_floor_db)
        r = self.rays
        rays = replace(r, direct=Ray(r.direct.d, r.direct.c, loss_d), floor_ratio=10.0 ** (floor / 10.0),
                       road=None if r.road is None else Ray(r.road.d, r.road.c, loss_r))
        cav, factor = self.cavity(material_loss_db, tread_loss_db)
        scene = self.scene if cav is None else replace(self.scene, cavity=cav)
        f = with_cavity(scene, rays.field(), self.wheel, self.theta, self.spots, self.axes, factor)
        return level_dbm(self.scene, f.power()) + eirp_offset_db


def _cabin_terms(scene: Scene, coded, spots: np.ndarray, axes: np.ndarray) -> CabinTerms:
    """Trace the cabin's sensor -> patch paths and the receivers' wall terms once on the coded hull
    (material numbers in place of losses), as core.scoring's cavity is built (core.cavity.build_cavity)."""
    cav = scene.cavity
    p, n, a, number = cv.surface_samples(coded)
    if not np.isclose(float(a.sum()), cav.surface_area_m2, rtol=1e-12, atol=0.0):
        raise ValueError("the cavity's hull patches are not those of the default spacing")
    paths = cv.input_paths(scene, p, n, cav.input_angles)
    f = scene.freq_hz
    legs = [body_paths(coded, paths.src, paths.outside, f, paths.bits)]
    road = paths.road_point is not None
    if road:
        legs += [body_paths(coded, paths.src, paths.road_point, f, paths.bits),
                 body_paths(coded, paths.outside, paths.road_point, f)]
    parts = None
    if scene.use_wheel_loss:
        groups = _wheel_groups(paths.wheel, len(paths.src))
        ends = (paths.outside, paths.road_point) if road else (paths.outside,)
        parts = tuple((w.rim_db, w.through_tread) for w in
                      (_wheel_losses(scene, groups, paths.src, end, detail=True) for end in ends))
    dipole = scene.receiver_pattern == "dipole"
    wall, wall_material = cv.wall_terms(coded, spots, axes if dipole else None, cav.wavelength_m)
    return CabinTerms(
        patches=(p, n, a), patch_material=np.rint(number).astype(int), paths=paths,
        legs=tuple((lp, lp.loss_db.astype(int)) for lp in legs), wheel_parts=parts,
        inside=inside_hull(scene.hull, spots[:, 0], spots[:, 1], spots[:, 2]), wall=wall,
        wall_material=np.rint(wall_material).astype(int), contents_m2=cav.sigma_contents_m2)


__all__ = ["CabinTerms", "LinkTerms"]
