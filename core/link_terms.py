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
milliseconds, exact for any material losses. The cavity does not depend on the links, so one
:class:`Cabin` per scene serves every LinkTerms of it (core.calibration_fit shares it between the
levels with angles and the turns of the drive logs), and the crossings of the paths to a material's
patches are traced only once that material is an opening.
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


def _coded_hull(scene: Scene):
    """The scene's hull built with material numbers in place of losses, and the material names by number."""
    number: dict[str, int] = {}

    def material_number(name: str) -> float:
        return float(number.setdefault(name, len(number)))

    coded = vehicle_hull(scene.vehicle, scene.wheels, material_number)
    return coded, tuple(number)


def _tire(scene: Scene, tread: float, parts: tuple[np.ndarray, np.ndarray]) -> np.ndarray:
    """The knife-edge wheel's loss, dB: rim knife edge plus the tire exit (tread or sidewall loss)."""
    rim, through_tread = parts
    return rim + np.where(through_tread, tread, scene.sidewall_loss_db)


class Cabin:
    """The cabin's diffuse field of one scene for other losses: what stays is traced once (see the module
    notes); :meth:`cavity` assembles the cavity for given material losses. Shared by every LinkTerms of the
    scene (:func:`cabin_of`): the cavity does not depend on the links.

    ``patches``: (centres, normals, areas) of every hull patch (core.cavity.surface_samples);
    ``patch_material`` (P,) the material number of each; ``paths`` the sensor -> patch paths to every patch
    (core.cavity.InputPaths); ``wheel_parts``: the knife-edge wheel's (rim loss dB, leaves through the tread)
    of the direct and the road legs (None with the installed pattern). The body crossings of the paths to
    a material's patches are traced when that material is first an opening (metal never is in a fit:
    core.calibration.Parameter.bounds), and kept."""

    def __init__(self, scene: Scene, coded, materials: tuple[str, ...]):
        cav = scene.cavity
        p, n, a, number = cv.surface_samples(coded)
        if not np.isclose(float(a.sum()), cav.surface_area_m2, rtol=1e-12, atol=0.0):
            raise ValueError("the cavity's hull patches are not those of the default spacing")
        self.scene, self.coded, self.materials = scene, coded, materials
        self.patches = (p, n, a)
        self.patch_material = np.rint(number).astype(int)
        self.paths = paths = cv.input_paths(scene, p, n, cav.input_angles)
        W, A, _ = paths.shape
        self._path_material = np.tile(self.patch_material, W * A)
        self.wheel_parts = None
        if scene.use_wheel_loss:
            groups = _wheel_groups(paths.wheel, len(paths.src))
            ends = (paths.outside,) if paths.road_point is None else (paths.outside, paths.road_point)
            self.wheel_parts = tuple((w.rim_db, w.through_tread) for w in
                                     (_wheel_losses(scene, groups, paths.src, end, detail=True) for end in ends))
        self.contents_m2 = cav.sigma_contents_m2
        self._legs: dict[int, tuple] = {}
        self._last: tuple | None = None

    def _legs_of(self, m: int):
        """(path indices, legs with their material numbers) of the paths to material m's patches."""
        hit = self._legs.get(m)
        if hit is None:
            idx = np.flatnonzero(self._path_material == m)
            ps, f = self.paths, self.scene.freq_hz
            legs = [body_paths(self.coded, ps.src[idx], ps.outside[idx], f, ps.bits[idx])]
            if ps.road_point is not None:
                legs += [body_paths(self.coded, ps.src[idx], ps.road_point[idx], f, ps.bits[idx]),
                         body_paths(self.coded, ps.outside[idx], ps.road_point[idx], f)]
            hit = self._legs[m] = (idx, tuple((lp, lp.loss_db.astype(int)) for lp in legs))
        return hit

    def cavity(self, mat: np.ndarray, tread_loss_db: float | None, contents_m2: float | None = None) -> cv.Cavity:
        """The core.cavity.Cavity with material losses ``mat`` (dB by material number), the tire tread loss and
        the contents' absorption (m^2; None: the scene's), assembled by core.cavity.cavity_from as the engine
        assembles it; the last kept."""
        sc = self.scene
        tread = sc.tread_loss_db if tread_loss_db is None else float(tread_loss_db)
        contents = self.contents_m2 if contents_m2 is None else float(contents_m2)
        key = (mat.tobytes(), tread, contents)
        if self._last is not None and self._last[0] == key:
            return self._last[1]
        patch_loss = mat[self.patch_material]
        K = len(self._path_material)
        # the losses of the paths to the openings (the others are not summed: core.cavity.input_power)
        loss_d = np.zeros(K)
        loss_r = None if self.paths.road_point is None else np.zeros(K)
        for m in np.unique(self.patch_material[cv.is_opening(patch_loss)]):
            idx, legs = self._legs_of(int(m))
            body = [lp.total_db(mat[numbers]) for lp, numbers in legs]
            loss_d[idx] = body[0]
            if loss_r is not None:
                loss_r[idx] = body[1] + body[2]
        if self.wheel_parts is not None:
            loss_d = loss_d + _tire(sc, tread, self.wheel_parts[0])
            if loss_r is not None:
                loss_r = loss_r + _tire(sc, tread, self.wheel_parts[1])
        cav = cv.cavity_from(self.patches, patch_loss, self.paths, np.arange(len(patch_loss)), loss_d, loss_r,
                             contents, sc.freq_hz, sc.wavelength_m, sc.cavity.input_angles)
        self._last = (key, cav)
        return cav


def cabin_of(scene: Scene) -> Cabin | None:
    """The :class:`Cabin` of a scene (None without a cavity), to share among its LinkTerms."""
    if getattr(scene, "cavity", None) is None:
        return None
    coded, materials = _coded_hull(scene)
    return Cabin(scene, coded, materials)


@dataclass(frozen=True, eq=False)
class LinkTerms:
    """N links (spot, wheel, wheel angle) of one scene, prepared for fast re-evaluation.

    ``materials``: the material names, by the number each crossing carries; ``base_loss_db`` their
    losses in the scene (dB). ``legs``: the body crossings of the direct ray, and of the road ray's
    two legs (sensor -> road, receiver -> road) when the road reflection is on. ``wheel_parts``:
    (rim knife-edge loss dB, leaves through the tread) of the direct and the road ray, for the
    knife-edge wheel; None with the installed wheel pattern (which holds the rim and tire already).
    With a cavity: ``cabin`` (:class:`Cabin`), and per link ``inside`` (N,) the receiver is in the hull,
    ``wall`` (2, N) its wall factors and ``wall_material`` (2, N) the material number of the panel behind
    each (core.cavity.wall_terms).
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
    cabin: Cabin | None = None
    inside: np.ndarray | None = None
    wall: np.ndarray | None = None
    wall_material: np.ndarray | None = None

    @classmethod
    def build(cls, scene: Scene, wheel: np.ndarray, theta: np.ndarray, spots: np.ndarray,
              axes: np.ndarray, cabin: Cabin | None = None) -> LinkTerms:
        """Prepare links: ``wheel`` (N,) wheel indices, ``theta`` (N,) wheel angles (rad), ``spots`` and
        ``axes`` (N, 3) receiver positions (m) and unit antenna axes; ``cabin``: the scene's
        :func:`cabin_of` when already made (shared by the LinkTerms of a scene)."""
        wheel = np.asarray(wheel, int)
        theta = np.asarray(theta, float)
        spots = np.asarray(spots, float).reshape(-1, 3)
        axes = np.asarray(axes, float).reshape(-1, 3)
        src, s_axis, bits0 = sensor_states(scene, wheel, theta)
        road = scene.ground_reflection
        spot_bits = start_bits(scene.hull, spots[:, 0], spots[:, 1], spots[:, 2]) if road else None
        rays = link_rays(scene, wheel, theta, src, s_axis, bits0, spots, axes, spot_bits, detail=road)
        v = scene.vehicle
        coded, materials = _coded_hull(scene)
        overrides = {name: m.loss_db for name, m in v.materials.items()}
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
        if getattr(scene, "cavity", None) is None:
            return cls(scene, rays, materials, base, legs, parts, wheel, theta, spots, axes)
        if cabin is None:
            cabin = Cabin(scene, coded, materials)
        elif cabin.scene is not scene or cabin.materials != materials:
            raise ValueError("the cabin is another scene's")
        wall, wall_material = cv.wall_terms(coded, spots, axes if scene.receiver_pattern == "dipole" else None,
                                            scene.wavelength_m)
        return cls(scene, rays, materials, base, legs, parts, wheel, theta, spots, axes, cabin,
                   inside_hull(scene.hull, spots[:, 0], spots[:, 1], spots[:, 2]), wall,
                   np.rint(wall_material).astype(int))

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
            loss_d = loss_d + _tire(sc, tread, self.wheel_parts[0])
            if loss_r is not None:
                loss_r = loss_r + _tire(sc, tread, self.wheel_parts[1])
        return loss_d, loss_r

    def cavity(self, material_loss_db: Mapping[str, float] | None = None, tread_loss_db: float | None = None,
               contents_m2: float | None = None):
        """(core.cavity.Cavity, diffuse factor (N,) of the receivers) with these losses and contents' absorption
        (m^2), as core.scoring builds them for a vehicle with these values ((None, None) without a cavity)."""
        if self.cabin is None:
            return None, None
        mat = self.material_losses(material_loss_db)
        cav = self.cabin.cavity(mat, tread_loss_db, contents_m2)
        wall = cv.combine_wall_factors(self.wall, mat[self.wall_material])
        return cav, cv.diffuse_factor(self.inside, wall, cav.sigma_total_m2, self.scene.receiver_pattern == "dipole")

    def levels_dbm(self, material_loss_db: Mapping[str, float] | None = None, tread_loss_db: float | None = None,
                   null_floor_db: float | None = None, eirp_offset_db: float = 0.0,
                   contents_m2: float | None = None) -> np.ndarray:
        """Received level of every link, dBm (the scene's values where an argument is None; ``contents_m2`` the
        cabin contents' absorption, m^2)."""
        loss_d, loss_r = self.ray_losses(material_loss_db, tread_loss_db)
        floor = self.scene.null_floor_db if null_floor_db is None else float(null_floor_db)
        r = self.rays
        rays = replace(r, direct=Ray(r.direct.d, r.direct.c, loss_d), floor_ratio=10.0 ** (floor / 10.0),
                       road=None if r.road is None else Ray(r.road.d, r.road.c, loss_r))
        cav, factor = self.cavity(material_loss_db, tread_loss_db, contents_m2)
        scene = self.scene if cav is None else replace(self.scene, cavity=cav)
        f = with_cavity(scene, rays.field(), self.wheel, self.theta, self.spots, self.axes, factor)
        return level_dbm(self.scene, f.power()) + eirp_offset_db


__all__ = ["Cabin", "LinkTerms", "cabin_of"]
