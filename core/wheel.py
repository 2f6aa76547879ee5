"""The sensor's path over a wheel turn, and the wheel's own effect on the link (knife-edge model).

Wheel angle theta = 0 puts the sensor at the top of the wheel; theta grows in the direction the
wheel turns when the vehicle drives forward (the top moves forward, +x). In vehicle axes the
sensor sits at

    centre + r_s (sin theta, 0, cos theta) + a_s * outboard_sign * (0, 1, 0)

with r_s the mounting radius and a_s the axial offset (positive outboard). Sensor antenna axes:
radial (sin theta, 0, cos theta), tangential (cos theta, 0, -sin theta), axial (0, 1, 0).

Knife-edge wheel model: the rim barrel is a metal cylinder (radius ``barrel_radius_m``, width
``rim_width_m``), the tire is the annulus out to the tread radius. A path that enters the barrel is
shadowed; it is taken to bend over the rim flange on the receiver's side, treated as a knife edge:
the clearance h is measured where the path crosses the flange plane (h > 0 when it passes inside
the flange circle), d1, d2 along the path, and the loss is ITU-R P.526 J(v); the same edge gives
the (small) lit-side loss of paths passing just outside the flange. The path leaves the tire
through a sidewall (rubber) or through the tread (steel belt), each with its material loss.

References
----------
ITU-R P.526-15 section 4.1 (knife edge, eq. 26 and 31). Rim and tire dimensions: ISO 4000-1 /
ETRTO tire code arithmetic (core.tires). The drop-centre depth is an engineering default.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from core.propagation import knife_edge_loss_db, knife_edge_v

#: depth of the rim's drop centre below the bead seat, m (engineering default)
DROP_CENTRE_DEPTH_M = 0.025


@dataclass(frozen=True)
class WheelGeometry:
    """One wheel in vehicle axes; lengths in m."""

    id: str
    centre: tuple[float, float, float]
    outboard_sign: float
    rim_radius_m: float
    rim_width_m: float
    tire_radius_m: float
    tire_width_m: float
    sensor_radius_m: float
    sensor_offset_m: float

    @property
    def barrel_radius_m(self) -> float:
        return self.rim_radius_m - DROP_CENTRE_DEPTH_M

    @property
    def rolling_radius_m(self) -> float:
        """Radius used for wheel turns per distance, m (the unloaded tire radius)."""
        return self.tire_radius_m

    @classmethod
    def from_wheel(cls, wheel) -> "WheelGeometry":
        """Build from a ``core.vehicle.Wheel``."""
        t = wheel.tire_size
        return cls(
            id=wheel.id,
            centre=(wheel.x_m, wheel.y_m, t.outer_radius_m),
            outboard_sign=wheel.outboard_sign,
            rim_radius_m=t.rim_radius_m,
            rim_width_m=wheel.rim_width_m,
            tire_radius_m=t.outer_radius_m,
            tire_width_m=t.section_width_m,
            sensor_radius_m=wheel.sensor_radius,
            sensor_offset_m=wheel.sensor_offset,
        )


def sensor_positions(w: WheelGeometry, theta_rad: np.ndarray) -> np.ndarray:
    """Sensor positions over the turn, (A, 3) m."""
    th = np.asarray(theta_rad, float)
    cx, cy, cz = w.centre
    out = np.empty(th.shape + (3,))
    out[..., 0] = cx + w.sensor_radius_m * np.sin(th)
    out[..., 1] = cy + w.outboard_sign * w.sensor_offset_m
    out[..., 2] = cz + w.sensor_radius_m * np.cos(th)
    return out


def sensor_axes(theta_rad: np.ndarray, kind: str) -> np.ndarray:
    """Unit sensor antenna axes over the turn, (A, 3): 'radial', 'tangential' or 'axial'."""
    th = np.asarray(theta_rad, float)
    out = np.zeros(th.shape + (3,))
    if kind == "radial":
        out[..., 0], out[..., 2] = np.sin(th), np.cos(th)
    elif kind == "tangential":
        out[..., 0], out[..., 2] = np.cos(th), -np.sin(th)
    elif kind == "axial":
        out[..., 1] = 1.0
    else:
        raise ValueError(f"unknown sensor axis {kind!r}")
    return out


def _to_wheel_frame(w: WheelGeometry, p: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(x, z) offsets in the wheel plane and the axial coordinate (outboard positive), m."""
    cx, cy, cz = w.centre
    return p[..., 0] - cx, p[..., 2] - cz, w.outboard_sign * (p[..., 1] - cy)


def wheel_loss_db(
    w: WheelGeometry,
    src: np.ndarray,
    dst: np.ndarray,
    freq_hz: float,
    sidewall_loss_db: float,
    tread_loss_db: float,
) -> np.ndarray:
    """Loss of the wheel itself (rim knife edge + tire exit) on paths src -> dst, dB.

    Parameters
    ----------
    w : the wheel carrying the sensor
    src : sensor positions (..., 3), m (inside the tire, on the rim)
    dst : path end points (..., 3), m (receiver, or the ground reflection point)
    freq_hz : frequency, Hz
    sidewall_loss_db, tread_loss_db : crossing losses of the tire sidewall and the steel-belted tread, dB
    """
    rim_db, tread = wheel_loss_parts(w, src, dst, freq_hz)
    return rim_db + np.where(tread, tread_loss_db, sidewall_loss_db)


def wheel_loss_parts(w: WheelGeometry, src: np.ndarray, dst: np.ndarray, freq_hz: float) -> tuple[np.ndarray, np.ndarray]:
    """The geometry of :func:`wheel_loss_db`: the rim knife-edge loss (dB) of each path, and whether it
    leaves the tire through the tread (True) or a sidewall (False). A path that enters the rim barrel
    leaves through the sidewall beyond the flange it diffracts over."""
    src = np.asarray(src, float)
    dst = np.asarray(dst, float)
    sx, sz, sw = _to_wheel_frame(w, src)
    ex, ez, ew = _to_wheel_frame(w, dst)
    dx, dz, dw = ex - sx, ez - sz, ew - sw
    length = np.sqrt(dx * dx + dz * dz + dw * dw)
    length = np.maximum(length, 1e-9)
    ux, uz, uw = dx / length, dz / length, dw / length
    # radial quadratic |(sx, sz) + t (ux, uz)|^2 = R^2
    qa = ux * ux + uz * uz
    qb = 2.0 * (sx * ux + sz * uz)
    qa_safe = np.where(qa > 1e-12, qa, 1.0)
    half_w = 0.5 * w.rim_width_m
    # terms of the discriminant and the roots shared by the barrel and the tire circle
    rho2 = sx * sx + sz * sz
    qb2 = qb * qb
    qa4 = 4.0 * qa
    two_qa = 2.0 * qa_safe
    solvable = qa > 1e-12

    def root(radius, sign):
        """(discriminant > 0, the smaller (sign -1) or larger (sign +1) root) of the radial quadratic."""
        disc = qb2 - qa4 * (rho2 - radius * radius)
        ok = (disc > 0) & solvable
        sq = np.sqrt(np.where(ok, disc, 0.0))
        return ok, ((-qb - sq) if sign < 0 else (-qb + sq)) / two_qa

    # 1. does the path enter the rim barrel?
    ok_b, tb1 = root(w.barrel_radius_m, -1)
    wb = sw + tb1 * uw
    enters = ok_b & (tb1 > 1e-9) & (tb1 < length) & (np.abs(wb) <= half_w)

    # 2. knife edge over the receiver-side flange (circle of the rim radius in the plane w = +-W/2)
    flange_w = np.where(uw >= 0.0, half_w, -half_w)
    uw_safe = np.where(np.abs(uw) > 1e-12, uw, 1e-12)
    tf = (flange_w - sw) / uw_safe
    crosses = (np.abs(uw) > 1e-12) & (tf > 0.0) & (tf < length)
    rho_f = np.hypot(sx + tf * ux, sz + tf * uz)
    lit_edge = crosses & (rho_f < w.tire_radius_m)  # passes by the flange within the tire's extent
    # the knife edge only on the paths it acts on (shadowed, or lit within the tire's extent)
    m = np.flatnonzero(enters | lit_edge)
    rim_db = np.zeros(np.shape(length))
    if len(m):
        tfm, lm, tbm = tf[m], length[m], tb1[m]
        cm = crosses[m]
        d1 = np.where(cm, tfm, 1.0)
        d2 = np.where(cm, lm - tfm, 1.0)
        # a shadowed path that never reaches a flange plane (receiver within the wheel's width):
        # clearance = axial distance from the barrel entry point to the nearer flange
        h_axial = half_w - np.abs(np.clip(wb[m], -half_w, half_w))
        use_axial = enters[m] & ~cm
        h = np.where(use_axial, h_axial, w.rim_radius_m - rho_f[m])
        d1 = np.where(use_axial, np.maximum(tbm, 1e-6), np.maximum(d1, 1e-6))
        d2 = np.where(use_axial, np.maximum(lm - tbm, 1e-6), np.maximum(d2, 1e-6))
        rim_db[m] = knife_edge_loss_db(knife_edge_v(h, d1, d2, freq_hz))

    # 3. where the path leaves the tire: tread (steel belt) or sidewall
    ok_t, tt2 = root(w.tire_radius_m, +1)
    t_tread = np.where(ok_t & (tt2 > 0), tt2, np.inf)
    half_tw = 0.5 * w.tire_width_m
    side_w = np.where(uw >= 0.0, half_tw, -half_tw)
    t_side = np.where(np.abs(uw) > 1e-12, (side_w - sw) / uw_safe, np.inf)
    t_side = np.where(t_side > 0, t_side, np.inf)
    through_tread = (t_tread < t_side) & (t_tread < length)
    return rim_db, ~enters & through_tread
