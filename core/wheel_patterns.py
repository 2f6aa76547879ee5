"""Installed wheel patterns: the far field of the sensor on its rim (and tire belt), from NEC-2 tables.

At 315 and 433.92 MHz a rim is under half a wavelength across: it re-radiates the sensor's field
rather than casting a knife-edge shadow. The installed pattern of the sensor dipole on a wire-grid
wheel (rim barrel with flanges, outboard hub and spokes, optionally the tire's steel belt) is solved
once with NEC-2 (method of moments; ``tools/make_wheel_patterns.py`` with the models of
``core.fullwave.nec_models``) for standard rim sizes, both
bands and the three sensor axes, and stored in ``core/data/wheel_patterns.npz``. This module (numpy
only) selects or interpolates a table for a wheel, turns it with the wheel and looks it up.

Table convention (wheel frame)
------------------------------
X = vehicle forward, Y = axial pointing outboard (away from the car), Z = up, origin at the wheel
centre. The table holds the sensor at wheel angle theta = 0 (top, +Z), at its mounting radius and
axial offset (``sensor_radius_m``, ``sensor_offset_m``, positive outboard). Directions: polar angle
t from +Z (0..180 deg), azimuth p from +X toward +Y (0..360 deg), 5 deg steps. Stored: complex
E_t, E_p (phase referred to the wheel centre, time factor exp(+j omega t)) normalised so that
|E_t|^2 + |E_p|^2 is the directivity relative to the total radiated power (linear; its integral
over the sphere is 4 pi). A bare short dipole gives 1.5 sin^2 in its own frame.

Near-field correction: receivers sit 1-3 m from a wheel about 0.6 m across, inside its Fresnel
region, where the far field alone errs by up to 3-5 dB. Each table also holds the first term of
the field's expansion in powers of 1/r (Wilcox 1956): r E exp(jkr) = F0 + F1/r + ..., F0 the far
field above and F1 (Cartesian, 10 deg grid, same normalisation) sampled by NEC-2 on a sphere of
1.5 m about the wheel centre. Given the distance, :func:`field_vectors` returns the corrected field.

At wheel angle theta the pattern is the theta = 0 pattern rotated about Y by theta (the spokes
turn with the sensor, so this is exact): with R(theta) the rotation taking +Z to
(sin theta, 0, cos theta), E_theta(d) = R E_0(R^T d). A right-hand wheel is the mirror image of a
left-hand one in the vehicle's x-z plane: with M = diag(1, -1, 1), E_right(d) = M E_left(M d)
(an axial dipole then comes out along -y, the same antenna up to the sign of its phase).

References
----------
- G. J. Burke, A. J. Poggio, NEC-2 user's guide (Lawrence Livermore National Laboratory, 1981):
  the solver behind the tables (through the PyNEC package).
- C. A. Balanis, Antenna Theory: Analysis and Design: directivity, far-field phase reference
  (exp(j k r.r0) for a displaced source), short-dipole pattern 1.5 sin^2 (sec. 4.2).
- C. H. Wilcox, "An expansion theorem for electromagnetic fields", Comm. Pure Appl. Math. 9
  (1956) (from memory): E = exp(-jkr)/r sum_n F_n / r^n outside the sphere enclosing the sources.
- Wire-grid rules and mesh: see core/fullwave/nec_models.py and docs/VALIDATION.md.
"""

from __future__ import annotations

import hashlib
import importlib.util
import json
import math
import os
import sys
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import numpy as np

__all__ = [
    "AXES",
    "BELT_DEPTH_M",
    "BELT_WIDTH_FRACTION",
    "DATA_PATH",
    "PatternTable",
    "TableSet",
    "axis_vector",
    "bare_dipole_table",
    "compute_table",
    "directivity",
    "field_vectors",
    "load_table_set",
    "rotation_y",
    "select_table",
    "table_for_wheel",
    "user_cache_dir",
]

C0_M_PER_S = 299_792_458.0
INCH_M = 0.0254
#: Sensor axes in the wheel frame at theta = 0 (sensor on top).
AXES = ("radial", "tangential", "axial")
_AXIS_VECTORS = {"radial": (0.0, 0.0, 1.0), "tangential": (1.0, 0.0, 0.0), "axial": (0.0, 1.0, 0.0)}
#: The shipped tables.
DATA_PATH = Path(__file__).resolve().parent / "data" / "wheel_patterns.npz"
#: Steel belt radius = tire outer radius - this, m (tread rubber and belt cover; engineering default).
BELT_DEPTH_M = 0.015
#: Steel belt width = this x tire section width (engineering default).
BELT_WIDTH_FRACTION = 0.8
#: Version of the wheel model and mesh rules (part of the cache key; bump when they change).
MODEL_VERSION = "wheel-grid-1"
# A band table is used for frequencies within this fraction of the band's centre.
_BAND_TOLERANCE = 0.10


def axis_vector(axis: str) -> np.ndarray:
    """Unit sensor axis in the wheel frame at theta = 0: radial +Z, tangential +X, axial +Y."""
    try:
        return np.array(_AXIS_VECTORS[axis])
    except KeyError:
        raise ValueError(f"unknown sensor axis {axis!r} (expected one of {', '.join(AXES)})") from None


def rotation_y(theta_rad) -> np.ndarray:
    """Rotation(s) about +Y taking +Z to (sin theta, 0, cos theta): array (..., 3, 3)."""
    th = np.asarray(theta_rad, dtype=float)
    c, s = np.cos(th), np.sin(th)
    z, o = np.zeros_like(th), np.ones_like(th)
    return np.stack([np.stack([c, z, s], -1), np.stack([z, o, z], -1), np.stack([-s, z, c], -1)], -2)


def _sph_basis(theta_deg: np.ndarray, phi_deg: np.ndarray):
    t = np.radians(theta_deg)[:, None]
    p = np.radians(phi_deg)[None, :]
    st, ct, sp, cp = np.sin(t), np.cos(t), np.sin(p), np.cos(p)
    zero = np.zeros_like(st * sp)
    r_hat = np.stack([st * cp, st * sp, ct + zero], -1)
    t_hat = np.stack([ct * cp, ct * sp, -st + zero], -1)
    p_hat = np.stack([-sp + zero, cp + zero, zero], -1)
    return r_hat, t_hat, p_hat


def _sphere_weights(theta_deg: np.ndarray, n_phi: int) -> np.ndarray:
    t = np.radians(theta_deg)
    w = np.sin(t) * (t[1] - t[0])
    w[0] *= 0.5
    w[-1] *= 0.5
    return w[:, None] * (2.0 * math.pi / n_phi)


@dataclass(frozen=True, eq=False)
class PatternTable:
    """One installed far-field pattern in the wheel frame (sensor at theta = 0). SI units.

    Attributes
    ----------
    theta_deg : (T,) polar angles from +Z, 0..180 deg.
    phi_deg : (P,) azimuths from +X toward +Y, 0..360 - step deg.
    e_theta, e_phi : (T, P) complex, |E_t|^2 + |E_p|^2 = directivity (linear); phase referred to
        the wheel centre.
    freq_hz : frequency, Hz.
    axis : "radial", "tangential" or "axial".
    rim_diameter_m, rim_width_m : rim (bead-seat) diameter and width, m.
    sensor_radius_m, sensor_offset_m : sensor position at theta = 0: (0, offset, radius), m.
    belt_radius_m : steel-belt radius, m, or None without belt.
    kind : "table" (shipped, exact size), "interpolated", "computed" (NEC-2 on demand) or
        "analytic" (bare dipole, no wheel).
    provenance : one line for reports: which table, how it was obtained.
    power_ratio : power radiated on the wheel / in free space for the same dipole current.
    near : (T1, P1, 3) complex or None: near-field term F1 (Cartesian, m x field units) on the
        grid near_theta_deg x near_phi_deg, sampled at near_radius_m.
    """

    theta_deg: np.ndarray
    phi_deg: np.ndarray
    e_theta: np.ndarray
    e_phi: np.ndarray
    freq_hz: float
    axis: str
    rim_diameter_m: float
    rim_width_m: float
    sensor_radius_m: float
    sensor_offset_m: float
    belt_radius_m: float | None
    kind: str
    provenance: str
    power_ratio: float = float("nan")
    near: np.ndarray | None = None
    near_theta_deg: np.ndarray | None = None
    near_phi_deg: np.ndarray | None = None
    near_radius_m: float = float("nan")
    _grid: np.ndarray = field(init=False, repr=False)
    _near_grid: np.ndarray | None = field(init=False, repr=False)

    def __post_init__(self):
        _, t_hat, p_hat = _sph_basis(self.theta_deg, self.phi_deg)
        cart = self.e_theta[..., None] * t_hat + self.e_phi[..., None] * p_hat
        # wrap the azimuth so that bilinear lookups need no modulo on the upper index
        object.__setattr__(self, "_grid", np.concatenate([cart, cart[:, :1]], axis=1))
        ng = None if self.near is None else np.concatenate([self.near, self.near[:, :1]], axis=1)
        object.__setattr__(self, "_near_grid", ng)

    @property
    def sensor_position_m(self) -> np.ndarray:
        """Sensor position at theta = 0 in the wheel frame, m."""
        return np.array([0.0, self.sensor_offset_m, self.sensor_radius_m])

    @property
    def wavenumber(self) -> float:
        return 2.0 * math.pi * self.freq_hz / C0_M_PER_S


def directivity(table: PatternTable) -> np.ndarray:
    """Directivity on the table grid, (T, P) linear."""
    return np.abs(table.e_theta) ** 2 + np.abs(table.e_phi) ** 2


def bare_dipole_table(
    axis: str,
    freq_hz: float = 433.92e6,
    sensor_radius_m: float = 0.0,
    sensor_offset_m: float = 0.0,
    step_deg: float = 5.0,
) -> PatternTable:
    """Analytic table of a short dipole alone (no wheel) at the sensor position, for checks.

    |E|^2 = 1.5 sin^2(angle to the axis) (Balanis, Antenna Theory, sec. 4.2); phase of a source
    displaced to (0, offset, radius): exp(j k r_hat . r0).
    """
    n_t = round(180.0 / step_deg)
    theta = np.arange(n_t + 1) * step_deg
    phi = np.arange(2 * n_t) * step_deg
    r_hat, t_hat, p_hat = _sph_basis(theta, phi)
    a = axis_vector(axis)
    k = 2.0 * math.pi * freq_hz / C0_M_PER_S
    r0 = np.array([0.0, sensor_offset_m, sensor_radius_m])
    a_perp = a - np.sum(r_hat * a, -1, keepdims=True) * r_hat
    phase = np.exp(1j * k * np.sum(r_hat * r0, -1, keepdims=True))
    field_c = -1j * math.sqrt(1.5) * a_perp * phase
    # 1/r term of the exact dipole field (Balanis eqs. 4-10a-c) in the same normalisation:
    # F1 = sqrt(1.5)/k (3 u (u.a) - a); exact for a dipole at the origin.
    n_t1 = round(180.0 / 10.0)
    t1 = np.arange(n_t1 + 1) * 10.0
    p1 = np.arange(2 * n_t1) * 10.0
    u1, _, _ = _sph_basis(t1, p1)
    ph1 = np.exp(1j * k * np.sum(u1 * r0, -1, keepdims=True))
    near = math.sqrt(1.5) / k * (3.0 * u1 * np.sum(u1 * a, -1, keepdims=True) - a) * ph1
    return PatternTable(
        theta, phi, np.sum(field_c * t_hat, -1), np.sum(field_c * p_hat, -1), float(freq_hz), axis,
        0.0, 0.0, float(sensor_radius_m), float(sensor_offset_m), None, "analytic",
        "bare short dipole (analytic, no wheel)", 1.0, near, t1, p1, float("inf"),
    )


# --------------------------------------------------------------------------------------------
# The shipped table set
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class TableSet:
    """All shipped tables: arrays indexed (diameter, width, band, axis, belt, ...)."""

    theta_deg: np.ndarray
    phi_deg: np.ndarray
    near_theta_deg: np.ndarray
    near_phi_deg: np.ndarray
    near_radius_m: float
    rim_diameter_in: np.ndarray
    rim_width_in: np.ndarray
    freq_hz: np.ndarray
    axes: tuple[str, ...]
    belt: tuple[bool, ...]
    e_theta: np.ndarray  # complex (D, W, F, A, B, T, P)
    e_phi: np.ndarray
    near: np.ndarray  # complex (D, W, F, A, B, T1, P1, 3)
    power_ratio: np.ndarray  # (D, W, F, A, B)
    sensor_radius_m: np.ndarray  # (D, W)
    sensor_offset_m: np.ndarray  # (D, W)
    belt_radius_m: np.ndarray  # (D,)
    provenance: dict
    path: str = ""

    def band_index(self, freq_hz: float) -> int:
        rel = np.abs(self.freq_hz - freq_hz) / self.freq_hz
        i = int(np.argmin(rel))
        if rel[i] > _BAND_TOLERANCE:
            bands = ", ".join(f"{f / 1e6:.2f} MHz" for f in self.freq_hz)
            raise ValueError(f"no wheel-pattern table near {freq_hz / 1e6:.2f} MHz (tables: {bands})")
        return i

    def table(self, rim_diameter_m: float, rim_width_m: float, freq_hz: float, axis: str,
              belt: bool = True) -> PatternTable:
        """The table for a rim size: exact when tabulated, else interpolated between neighbours.

        Bilinear in rim diameter and width between the four neighbouring tables, done so that the
        directivity in every direction is the bilinear mix of the neighbours' directivities (an
        interpolated size lies between its neighbours and still integrates to 4 pi): the field is
        the complex mix of the neighbours' fields (each referred to its own sensor position),
        rescaled to that directivity. The near-field term is mixed the same way (not rescaled).
        Sizes outside the tabulated range take the nearest edge (flagged in the provenance).
        """
        fi = self.band_index(freq_hz)
        axis_vector(axis)  # clear error for an unknown axis
        ai = self.axes.index(axis)
        bi = self.belt.index(bool(belt))
        d_in = rim_diameter_m / INCH_M
        w_in = rim_width_m / INCH_M
        (i0, i1, wi), clamp_d = _bracket(self.rim_diameter_in, d_in)
        (j0, j1, wj), clamp_w = _bracket(self.rim_width_in, w_in)
        corners = [(i0, j0, (1 - wi) * (1 - wj)), (i1, j0, wi * (1 - wj)), (i0, j1, (1 - wi) * wj), (i1, j1, wi * wj)]
        merged: dict[tuple[int, int], float] = {}
        for i, j, w in corners:
            if w > 1e-12:
                merged[(i, j)] = merged.get((i, j), 0.0) + w
        corners = [(i, j, w) for (i, j), w in merged.items()]
        band = float(self.freq_hz[fi])
        k = 2.0 * math.pi * band / C0_M_PER_S
        u0, _, _ = _sph_basis(self.theta_deg, self.phi_deg)
        u1, _, _ = _sph_basis(self.near_theta_deg, self.near_phi_deg)
        e_t = np.zeros(u0.shape[:2], complex)
        e_p = np.zeros_like(e_t)
        near = np.zeros(u1.shape, complex)
        d_mix = np.zeros(u0.shape[:2])
        s_r = s_o = p_ratio = 0.0
        for i, j, w in corners:
            r0 = np.array([0.0, self.sensor_offset_m[i, j], self.sensor_radius_m[i, j]])
            t_c, p_c = self.e_theta[i, j, fi, ai, bi], self.e_phi[i, j, fi, ai, bi]
            to_sensor = np.exp(-1j * k * (u0 @ r0))  # refer the phase to this table's sensor
            e_t += w * t_c * to_sensor
            e_p += w * p_c * to_sensor
            near += w * self.near[i, j, fi, ai, bi] * np.exp(-1j * k * (u1 @ r0))[..., None]
            d_mix += w * (np.abs(t_c) ** 2 + np.abs(p_c) ** 2)
            s_r += w * self.sensor_radius_m[i, j]
            s_o += w * self.sensor_offset_m[i, j]
            p_ratio += w * self.power_ratio[i, j, fi, ai, bi]
        if len(corners) > 1:
            mag2 = np.abs(e_t) ** 2 + np.abs(e_p) ** 2
            # where the complex mix cancels, keep the heaviest corner's polarization
            i, j, _ = max(corners, key=lambda c: c[2])
            r0 = np.array([0.0, self.sensor_offset_m[i, j], self.sensor_radius_m[i, j]])
            to_sensor = np.exp(-1j * k * (u0 @ r0))
            weak = mag2 < 1e-6 * np.maximum(d_mix, 1e-30)
            e_t = np.where(weak, self.e_theta[i, j, fi, ai, bi] * to_sensor, e_t)
            e_p = np.where(weak, self.e_phi[i, j, fi, ai, bi] * to_sensor, e_p)
            mag2 = np.abs(e_t) ** 2 + np.abs(e_p) ** 2
            scale = np.sqrt(d_mix / np.maximum(mag2, 1e-300))
            e_t, e_p = e_t * scale, e_p * scale
        s_pos = np.array([0.0, s_o, s_r])
        e_t = e_t * np.exp(1j * k * (u0 @ s_pos))  # back to the wheel centre
        e_p = e_p * np.exp(1j * k * (u0 @ s_pos))
        near = near * np.exp(1j * k * (u1 @ s_pos))[..., None]
        exact = len(corners) == 1 and not (clamp_d or clamp_w)
        size = f"{d_in:.1f} x {w_in:.1f} in rim"
        if not exact:
            near_sizes = sorted({f"{self.rim_diameter_in[i]:g} x {self.rim_width_in[j]:g}" for i, j, _ in corners})
            size += " from " + ", ".join(near_sizes) + " in"
        if clamp_d or clamp_w:
            size += " (outside the tabulated range: nearest edge used)"
        note = f", {band / 1e6:.2f} MHz table used for {freq_hz / 1e6:.2f} MHz" if abs(band - freq_hz) > 1e5 else ""
        label = "NEC-2 table" if exact else "NEC-2 tables interpolated"
        prov = (f"{label}: {size}, {band / 1e6:.2f} MHz, {axis} sensor, "
                f"{'with steel belt' if belt else 'no belt'}{note}")
        belt_r = float(np.interp(d_in, self.rim_diameter_in, self.belt_radius_m)) if belt else None
        return PatternTable(
            self.theta_deg, self.phi_deg, e_t, e_p, band, axis, float(rim_diameter_m), float(rim_width_m),
            float(s_r), float(s_o), belt_r, "table" if exact else "interpolated", prov, float(p_ratio),
            near, self.near_theta_deg, self.near_phi_deg, float(self.near_radius_m),
        )


#: sizes this close to a tabulated one (inches) use that table as it is
SIZE_SNAP_IN = 0.1


def _bracket(grid: np.ndarray, x: float, snap: float = SIZE_SNAP_IN) -> tuple[tuple[int, int, float], bool]:
    """Neighbouring indices and the weight of the upper one; flag when x is outside the grid.

    Sizes within ``snap`` (inches) of a grid point take that point: rim widths and diameters are
    nominal half-inch sizes, and a width given as 0.19 m (7.48 in) is the 7.5 in rim."""
    g = np.asarray(grid, dtype=float)
    near = np.nonzero(np.abs(g - x) <= snap)[0]
    if len(near):
        k = int(near[np.argmin(np.abs(g[near] - x))])
        return (k, k, 0.0), False
    if len(g) == 1:
        return (0, 0, 0.0), True
    if x <= g[0]:
        return (0, 0, 0.0), True
    if x >= g[-1]:
        n = len(g) - 1
        return (n, n, 0.0), True
    i = int(np.searchsorted(g, x) - 1)
    w = (x - g[i]) / (g[i + 1] - g[i])
    if w < 1e-9:
        return (i, i, 0.0), False
    if w > 1.0 - 1e-9:
        return (i + 1, i + 1, 0.0), False
    return (i, i + 1, float(w)), False


def _decode(a: np.ndarray) -> np.ndarray:
    """float16 (..., 2) re/im pairs -> complex128."""
    a = np.asarray(a, dtype=np.float64)
    return a[..., 0] + 1j * a[..., 1]


def _parity(axes) -> np.ndarray:
    """Mirror parity of each sensor axis under x -> -x: radial, axial +1 (even), tangential -1 (odd)."""
    return np.array([-1.0 if a == "tangential" else 1.0 for a in axes])


def unfold_half(half: np.ndarray, phi_half_deg: np.ndarray, phi_full_deg: np.ndarray, parity: np.ndarray,
                kind: str) -> np.ndarray:
    """Rebuild a full-azimuth grid from the x >= 0 half (azimuths -90..90 deg) by mirror symmetry.

    The wheel (sensor midway between two spokes) is symmetric about its x = 0 plane, so a source
    with parity s (+1 radial/axial, -1 tangential) gives E(M r) = s M E(r), M = diag(-1, 1, 1).
    The direction (t, p) mirrors to (t, 180 - p); spherical components map as
    E_t(t, 180 - p) = s E_t(t, p), E_p(t, 180 - p) = -s E_p(t, p) (``kind="spherical"``, last axis
    (E_t, E_p)); Cartesian ones as (-s E_x, s E_y, s E_z) (``kind="cartesian"``).

    ``half`` has the azimuth on axis -2 (before the component axis); ``parity`` broadcasts against
    ``half`` without that axis.
    """
    ph = np.round(np.asarray(phi_half_deg, float), 6)
    idx = {float(v): i for i, v in enumerate(ph)}
    comp_sign = np.array([1.0, -1.0]) if kind == "spherical" else np.array([-1.0, 1.0, 1.0])
    cols = []
    for p in np.asarray(phi_full_deg, float):
        q = float(np.round((p + 180.0) % 360.0 - 180.0, 6))  # -180..180
        if q in idx:
            cols.append(half[..., idx[q], :])
        else:
            m = float(np.round(180.0 - q if q > 0 else -180.0 - q, 6))
            cols.append(half[..., idx[m], :] * comp_sign * parity)
    return np.stack(cols, axis=-2)


@lru_cache(maxsize=4)
def _load(path: str) -> TableSet:
    with np.load(path, allow_pickle=False) as z:
        axes = tuple(str(a) for a in z["axes"])
        par = _parity(axes)[None, None, None, :, None, None, None]
        far = _decode(z["far"])  # (D, W, F, A, B, T, Ph, 2)
        phi = z["phi_deg"].astype(float)
        far = unfold_half(far, z["phi_half_deg"], phi, par, "spherical")
        near = unfold_half(_decode(z["near"]), z["near_phi_half_deg"], z["near_phi_deg"].astype(float), par,
                           "cartesian")
        return TableSet(
            theta_deg=z["theta_deg"].astype(float),
            phi_deg=phi,
            near_theta_deg=z["near_theta_deg"].astype(float),
            near_phi_deg=z["near_phi_deg"].astype(float),
            near_radius_m=float(z["near_radius_m"]),
            rim_diameter_in=z["rim_diameter_in"].astype(float),
            rim_width_in=z["rim_width_in"].astype(float),
            freq_hz=z["freq_hz"].astype(float),
            axes=axes,
            belt=tuple(bool(b) for b in z["belt"]),
            e_theta=far[..., 0],
            e_phi=far[..., 1],
            near=near,
            power_ratio=z["power_ratio"].astype(float),
            sensor_radius_m=z["sensor_radius_m"].astype(float),
            sensor_offset_m=z["sensor_offset_m"].astype(float),
            belt_radius_m=z["belt_radius_m"].astype(float),
            provenance=json.loads(str(z["provenance"])),
            path=path,
        )


def load_table_set(path: str | os.PathLike | None = None) -> TableSet:
    """Load (once, cached) the table set from ``path`` (default: the shipped ``DATA_PATH``)."""
    p = Path(path) if path is not None else DATA_PATH
    if not p.exists():
        raise FileNotFoundError(f"wheel-pattern tables not found: {p} (run tools/make_wheel_patterns.py)")
    return _load(str(p.resolve()))


def select_table(rim_diameter_m: float, rim_width_m: float, freq_hz: float, axis: str, belt: bool = True,
                 path: str | os.PathLike | None = None) -> PatternTable:
    """Shipped table for a rim size, band and sensor axis (interpolated between sizes when needed)."""
    return load_table_set(path).table(rim_diameter_m, rim_width_m, freq_hz, axis, belt)


def table_for_wheel(w, freq_hz: float, axis: str, belt: bool = True, exact: bool = False,
                    cache_dir: str | os.PathLike | None = None) -> PatternTable:
    """Table for a ``core.wheel.WheelGeometry`` (rim_radius_m, rim_width_m, tire_radius_m, ...).

    ``exact=False`` (default): the shipped tables, interpolated to the wheel's rim size; they hold
    the tabulated sensor position (bead-seat radius, a quarter rim width outboard) and a typical
    tire for the rim size. ``exact=True``: solve this wheel with NEC-2 now (needs PyNEC), with its
    own sensor position and tire belt, cached under :func:`user_cache_dir`.
    """
    if exact:
        belt_r = w.tire_radius_m - BELT_DEPTH_M if belt else None
        return compute_table(
            2.0 * w.rim_radius_m, w.rim_width_m, freq_hz, axis,
            sensor_radius_m=w.sensor_radius_m, sensor_offset_m=w.sensor_offset_m,
            belt_radius_m=belt_r, belt_width_m=BELT_WIDTH_FRACTION * w.tire_width_m, cache_dir=cache_dir,
        )
    return select_table(2.0 * w.rim_radius_m, w.rim_width_m, freq_hz, axis, belt)


# --------------------------------------------------------------------------------------------
# Lookup
# --------------------------------------------------------------------------------------------


def _bilinear(grid: np.ndarray, theta_deg: np.ndarray, n_phi: int, t: np.ndarray, p: np.ndarray) -> np.ndarray:
    """Bilinear lookup of a wrapped (T, P+1, C) grid at polar angles t and azimuths p (rad)."""
    step_t = math.radians(theta_deg[1] - theta_deg[0])
    step_p = 2.0 * math.pi / n_phi
    ft = t / step_t
    i0 = np.clip(np.floor(ft).astype(np.intp), 0, len(theta_deg) - 2)
    ft = np.clip(ft - i0, 0.0, 1.0)
    fp = p / step_p
    j0 = np.clip(np.floor(fp).astype(np.intp), 0, n_phi - 1)
    fp = np.clip(fp - j0, 0.0, 1.0)
    # one flat gather per corner (cheaper than 2-D fancy indexing)
    cols = grid.shape[1]
    flat = grid.reshape(-1, grid.shape[2])
    k00 = i0 * cols + j0
    out = flat.take(k00, axis=0) * ((1 - ft) * (1 - fp))[..., None]
    out += flat.take(k00 + 1, axis=0) * ((1 - ft) * fp)[..., None]
    out += flat.take(k00 + cols, axis=0) * (ft * (1 - fp))[..., None]
    out += flat.take(k00 + cols + 1, axis=0) * (ft * fp)[..., None]
    return out


#: Below this distance from the wheel centre the near-field term is held at its value there and the
#: field at most at the bare sensor's peak, m (the expansion is checked from 1.5 m).
NEAR_MIN_RADIUS_M = 0.8
#: The near-field term is sampled at 1.5 m and checked against NEC-2 at 1.5-3 m; it is used in full
#: out to NEAR_FULL_M and faded out linearly to NEAR_NONE_M, beyond which the far field is exact
#: enough (a single sampled 1/r term would otherwise carry folded higher-order terms far out), m.
NEAR_FULL_M = 3.5
#: peak field magnitude of the bare short dipole in the tables' normalisation (|E|^2 = directivity 1.5)
BARE_PEAK_FIELD = math.sqrt(1.5)
NEAR_NONE_M = 7.0


def near_term_weight(r_m) -> np.ndarray:
    """Weight of the near-field term at distance r from the wheel centre (1 near, 0 far)."""
    return np.clip((NEAR_NONE_M - np.asarray(r_m, float)) / (NEAR_NONE_M - NEAR_FULL_M), 0.0, 1.0)


def field_vectors(table: PatternTable, directions, theta_rad, outboard_sign=1.0, reference: str = "sensor",
                  distance_m=None) -> np.ndarray:
    """Installed field of the sensor toward ``directions`` at wheel angles ``theta_rad``, vehicle axes.

    Parameters
    ----------
    table : the pattern (wheel frame, sensor at theta = 0).
    directions : (..., 3) directions of departure in vehicle axes (normalised here), from the
        reference point (the sensor, or the wheel centre).
    theta_rad : (...) wheel angle(s), rad (broadcast against the directions' leading shape).
    outboard_sign : +1 for a left wheel (outboard = +y), -1 for a right wheel (mirror image).
    reference : "sensor" (default): rays start at the sensor's position at that wheel angle, and
        the phase is referred to it; "centre": rays start at the wheel centre (as stored).
    distance_m : optional (...) distance from the reference point to the field point along the
        direction, m. Without it the far field is returned. With it the field point is located,
        its direction and distance r from the wheel centre are used, and the near-field term is
        added: E = (F0 + F1 / r) exp(-jkr) / r, returned divided by exp(-jkd) / d (d = distance_m),
        so that the caller's usual exp(-jkd)/d spreading gives the corrected field.

    Returns
    -------
    (..., 3) complex E vectors; far field: |E|^2 = directivity (linear). Bilinear in the table's
    direction grids (Cartesian components, so the poles need no special care; the small radial
    part that interpolation leaves in the far field is removed).
    """
    if reference not in ("sensor", "centre"):
        raise ValueError("reference must be 'sensor' or 'centre'")
    d = np.asarray(directions, dtype=float)
    d = d / np.maximum(np.linalg.norm(d, axis=-1, keepdims=True), 1e-300)
    th = np.asarray(theta_rad, dtype=float)
    sg = np.asarray(outboard_sign, dtype=float)
    dist = None if distance_m is None else np.asarray(distance_m, dtype=float)
    shape = np.broadcast_shapes(d.shape[:-1], th.shape, sg.shape, () if dist is None else dist.shape)
    d = np.broadcast_to(d, shape + (3,))
    th = np.broadcast_to(th, shape)
    sg = np.broadcast_to(sg, shape)
    c, s = np.cos(th), np.sin(th)
    dx, dy, dz = d[..., 0], sg * d[..., 1], d[..., 2]  # M d
    # wheel-frame direction w = R(theta)^T M d
    w = np.stack([c * dx - s * dz, dy, s * dx + c * dz], axis=-1)
    k = table.wavenumber
    s0 = table.sensor_position_m
    if dist is None:
        u = w
    else:
        dist = np.broadcast_to(dist, shape)
        q = dist[..., None] * w + (s0 if reference == "sensor" else 0.0)  # field point from the centre
        r = np.linalg.norm(q, axis=-1)
        u = q / np.maximum(r, 1e-300)[..., None]
    t = np.arccos(np.clip(u[..., 2], -1.0, 1.0))
    p = np.mod(np.arctan2(u[..., 1], u[..., 0]), 2.0 * math.pi)
    e = _bilinear(table._grid, table.theta_deg, len(table.phi_deg), t, p)
    e = e - np.sum(e * u, axis=-1, keepdims=True) * u
    if dist is None:
        if reference == "sensor":
            e = e * np.exp(-1j * k * (u @ s0))[..., None]
    else:
        if table._near_grid is not None:
            e1 = _bilinear(table._near_grid, table.near_theta_deg, len(table.near_phi_deg), t, p)
            e = e + (e1 / np.maximum(r, NEAR_MIN_RADIUS_M)[..., None]) * near_term_weight(r)[..., None]
        # (exp(-jkr)/r) / (exp(-jkd)/d)
        dd = np.maximum(dist, 1e-300)
        e = e * (dd / np.maximum(r, 1e-300) * np.exp(-1j * k * (r - dd)))[..., None]
        # Inside NEAR_MIN_RADIUS_M of the wheel centre the expansion is not valid (it grows without
        # bound toward the centre); there the field is held at most at the bare sensor's peak
        # (|e|^2 = 1.5, a short dipole's directivity), so the level never exceeds the bare sensor's
        # free-space level at that distance. Such spots are flagged near field (core.scoring).
        mag = np.sqrt(np.sum(np.abs(e) ** 2, axis=-1))
        cap = (r < NEAR_MIN_RADIUS_M) & (mag > BARE_PEAK_FIELD)
        e = e * np.where(cap, BARE_PEAK_FIELD / np.maximum(mag, 1e-300), 1.0)[..., None]
    # back to vehicle axes: M R(theta) e
    ex = c * e[..., 0] + s * e[..., 2]
    ey = sg * e[..., 1]
    ez = -s * e[..., 0] + c * e[..., 2]
    return np.stack([ex, ey, ez], axis=-1)


# --------------------------------------------------------------------------------------------
# On-demand NEC-2 computation (needs PyNEC: the fullwave extra)
# --------------------------------------------------------------------------------------------


def user_cache_dir() -> Path:
    """Per-user cache directory for computed tables: $WHEELREACH_CACHE, else the platform's cache dir."""
    env = os.environ.get("WHEELREACH_CACHE")
    if env:
        return Path(env)
    if sys.platform.startswith("win"):
        base = Path(os.environ.get("LOCALAPPDATA", Path.home() / "AppData" / "Local"))
    elif sys.platform == "darwin":
        base = Path.home() / "Library" / "Caches"
    else:
        base = Path(os.environ.get("XDG_CACHE_HOME", Path.home() / ".cache"))
    return base / "wheelreach" / "wheel_patterns"


def _nec_models():
    """The wire-grid models (core.fullwave.nec_models); RuntimeError naming the extra when PyNEC is missing."""
    if importlib.util.find_spec("PyNEC") is None:
        raise RuntimeError("computing a wheel pattern needs PyNEC: pip install 'wheelreach[fullwave]'")
    from core.fullwave import nec_models

    return nec_models


def compute_table(
    rim_diameter_m: float,
    rim_width_m: float,
    freq_hz: float,
    axis: str,
    *,
    sensor_radius_m: float | None = None,
    sensor_offset_m: float | None = None,
    belt_radius_m: float | None = None,
    belt_width_m: float = 0.0,
    cache_dir: str | os.PathLike | None = None,
    use_cache: bool = True,
) -> PatternTable:
    """Solve the installed pattern of one wheel with NEC-2 now (PyNEC needed), cached on disk.

    The wheel is built by ``core.fullwave.nec_models`` (``WheelSpec`` defaults for what is not given:
    sensor at the bead-seat radius, a quarter rim width outboard). All three axes come from one
    solve and are cached together; the cache key is a hash of every parameter and MODEL_VERSION.
    """
    axis_vector(axis)
    params = {
        "rim_diameter_m": round(float(rim_diameter_m), 6),
        "rim_width_m": round(float(rim_width_m), 6),
        "freq_hz": round(float(freq_hz), 1),
        "sensor_radius_m": None if sensor_radius_m is None else round(float(sensor_radius_m), 6),
        "sensor_offset_m": None if sensor_offset_m is None else round(float(sensor_offset_m), 6),
        "belt_radius_m": None if belt_radius_m is None else round(float(belt_radius_m), 6),
        "belt_width_m": round(float(belt_width_m), 6) if belt_radius_m is not None else 0.0,
        "model": MODEL_VERSION,
    }
    key = hashlib.sha1(json.dumps(params, sort_keys=True).encode()).hexdigest()[:16]
    folder = Path(cache_dir) if cache_dir is not None else user_cache_dir()
    file = folder / f"wheel_{key}.npz"
    if use_cache and file.exists():
        return _read_cached(file, axis)
    nm = _nec_models()
    spec = nm.WheelSpec(
        params["rim_diameter_m"], params["rim_width_m"], sensor_radius_m=params["sensor_radius_m"],
        sensor_offset_m=params["sensor_offset_m"], belt_radius_m=params["belt_radius_m"],
        belt_width_m=params["belt_width_m"],
    )
    result = nm.wheel_patterns(spec, float(freq_hz))
    if use_cache:
        folder.mkdir(parents=True, exist_ok=True)
        arrays = {"theta_deg": result["theta_deg"], "phi_deg": result["phi_deg"]}
        arrays["near_theta_deg"] = result["near_theta_deg"]
        arrays["near_phi_deg"] = result["near_phi_deg"]
        for a in AXES:
            arrays[f"e_theta_{a}"] = result["patterns"][a]["e_theta"]
            arrays[f"e_phi_{a}"] = result["patterns"][a]["e_phi"]
            arrays[f"near_{a}"] = result["patterns"][a]["near"]
            arrays[f"power_ratio_{a}"] = np.array(result["patterns"][a]["power_ratio"])
        meta = dict(params, sensor_radius=spec.sensor_radius, sensor_offset=spec.sensor_offset,
                    segments=result["segments"], near_radius_m=result["near_radius_m"])
        arrays["meta"] = np.array(json.dumps(meta))
        tmp = file.with_name(file.name + ".tmp.npz")
        np.savez(tmp, **arrays)
        os.replace(tmp, file)
        return _read_cached(file, axis)
    pat = result["patterns"][axis]
    meta = dict(params, sensor_radius=spec.sensor_radius, sensor_offset=spec.sensor_offset,
                near_radius_m=result["near_radius_m"])
    return _computed_table(result["theta_deg"], result["phi_deg"], pat["e_theta"], pat["e_phi"], meta, axis,
                           pat["power_ratio"], pat["near"], result["near_theta_deg"], result["near_phi_deg"])


def _computed_table(theta, phi, e_t, e_p, meta: dict, axis: str, power_ratio: float, near, near_theta,
                    near_phi) -> PatternTable:
    belt = meta["belt_radius_m"]
    prov = (f"NEC-2 computed: {meta['rim_diameter_m'] / INCH_M:.1f} x {meta['rim_width_m'] / INCH_M:.1f} in rim, "
            f"{meta['freq_hz'] / 1e6:.2f} MHz, {axis} sensor, "
            + (f"steel belt r={belt:.3f} m" if belt is not None else "no belt"))
    return PatternTable(
        np.asarray(theta, float), np.asarray(phi, float), np.asarray(e_t, complex), np.asarray(e_p, complex),
        float(meta["freq_hz"]), axis, float(meta["rim_diameter_m"]), float(meta["rim_width_m"]),
        float(meta["sensor_radius"]), float(meta["sensor_offset"]), belt, "computed", prov, float(power_ratio),
        np.asarray(near, complex), np.asarray(near_theta, float), np.asarray(near_phi, float),
        float(meta["near_radius_m"]),
    )


def _read_cached(file: Path, axis: str) -> PatternTable:
    with np.load(file, allow_pickle=False) as z:
        meta = json.loads(str(z["meta"]))
        return _computed_table(z["theta_deg"], z["phi_deg"], z[f"e_theta_{axis}"], z[f"e_phi_{axis}"], meta, axis,
                               float(z[f"power_ratio_{axis}"]), z[f"near_{axis}"], z["near_theta_deg"],
                               z["near_phi_deg"])
