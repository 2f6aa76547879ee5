"""Reference solutions for the half-plane (straight metal edge) check of the knife-edge model.

Used by the NEC-2 plate validation (tests/validation/test_nec_halfplane.py) to tell apart what
the wire-grid plate does (finite plate, mesh) from what a perfectly conducting half-plane does:

- :func:`knife_edge_geometry`: the engine's single-knife-edge parameters for a straight path from
  a source to a receiver across the plane of a plate: the path crosses the plate plane at C; h is
  the distance from C to the edge, positive when C lies on the plate (the path is blocked); d1 and
  d2 are the distances from the two ends to C along the path (the convention of the design brief,
  section 5: "clearance h from where the path crosses the flange plane, distances d1, d2 along the
  path").
- :func:`utd_half_plane`: the field of a short dipole next to a perfectly conducting half-plane
  by the uniform geometrical theory of diffraction (incident + reflected + edge-diffracted rays),
  for both polarizations, in the plane normal to the edge through the source.

Geometry (m): the half-plane is x = 0, z < 0; its edge is the y axis (z = 0). The source is at
(x_s < 0, 0, z_s) and the receivers at (x_r > 0, 0, z_r). Polarization "soft": the dipole is
parallel to the edge (along y), E parallel to the edge (Dirichlet condition, E_y = 0 on the plate).
"hard": the dipole lies along z, in the plane normal to the edge, E perpendicular to the edge
(Neumann condition for H_y).

References
----------
- R. G. Kouyoumjian, P. H. Pathak, "A uniform geometrical theory of diffraction for an edge in a
  perfectly conducting surface", Proc. IEEE 62(11), 1974: half-plane (n = 2) diffraction
  coefficients D_s,h with the transition function F(X) and the distance parameter L = s s'/(s+s')
  for spherical-wave incidence.
- C. A. Balanis, Advanced Engineering Electromagnetics, ch. 13 (the same coefficients for a
  wedge of exterior angle n pi, n = 2 for a half-plane).
- A. Sommerfeld (1896): exact half-plane solution, which the uniform coefficients reproduce away
  from the edge (from memory: errors well under 1 dB beyond about a wavelength from the edge).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import fresnel

C0_M_PER_S = 299_792_458.0
ETA0_OHM = 376.730313412


def knife_edge_geometry(source_m, receivers_m) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(h, d1, d2) of the straight path from ``source_m`` to each receiver across the plate plane x = 0.

    h > 0 when the crossing point is on the plate (z < 0, shadow side of the edge). Distances in m.
    """
    s = np.asarray(source_m, dtype=float)
    r = np.atleast_2d(np.asarray(receivers_m, dtype=float))
    t = -s[0] / (r[:, 0] - s[0])
    c = s + t[:, None] * (r - s)
    h = -c[:, 2]
    d1 = np.linalg.norm(c - s, axis=1)
    d2 = np.linalg.norm(r - c, axis=1)
    return h, d1, d2


def _transition(x) -> np.ndarray:
    """Kouyoumjian-Pathak transition function F(X) = 2j sqrt(X) e^{jX} int_sqrt(X)^inf e^{-j t^2} dt."""
    x = np.asarray(x, dtype=float)
    s = np.sqrt(x)
    u = s * math.sqrt(2.0 / math.pi)
    fs, fc = fresnel(u)  # scipy returns (S, C) with the pi t^2 / 2 kernel
    tail = math.sqrt(math.pi / 2.0) * ((0.5 - fc) - 1j * (0.5 - fs))
    return 2j * s * np.exp(1j * x) * tail


def _scalar_source(points, src, freq_hz, pol):
    """Scalar field of the dipole along the edge-normal plane: E_y (soft, y dipole) or eta H_y (hard, z dipole)."""
    k = 2.0 * math.pi * freq_hz / C0_M_PER_S
    d = np.asarray(points, dtype=float) - np.asarray(src, dtype=float)
    r = np.linalg.norm(d, axis=-1)
    g = np.exp(-1j * k * r) / r
    if pol == "soft":
        # E_theta of a y dipole in the plane y = 0 (sin = 1), near-field terms kept.
        return 1j * k * ETA0_OHM / (4.0 * math.pi) * g * (1.0 + 1.0 / (1j * k * r) - 1.0 / (k * r) ** 2)
    # eta H of a z dipole: eta j k Il (z_hat x r_hat) / (4 pi r) (1 + 1/(jkr)) e^{-jkr}, y component
    # (z_hat x r_hat)_y = x / r (Balanis, Antenna Theory, eq. 4-10c, written in Cartesian form).
    sin_th = d[..., 0] / r
    return ETA0_OHM * 1j * k / (4.0 * math.pi) * g * sin_th * (1.0 + 1.0 / (1j * k * r))


def utd_half_plane(source_m, receivers_m, freq_hz: float, pol: str) -> np.ndarray:
    """Field of a short dipole near a conducting half-plane / free-space field, at each receiver (complex).

    ``pol`` is "soft" (dipole along the edge) or "hard" (dipole along z, normal to the edge in the
    plane of the plate). Source and receivers in the plane y = 0 (normal to the edge through the
    diffraction point at the origin). Returns u_total / u_free for the scalar u = E_y (soft) or
    eta H_y (hard); the shadow loss is -20 log10 |.|.

    References
    ----------
    Kouyoumjian & Pathak, Proc. IEEE 62(11), 1974 (uniform half-plane coefficients).
    """
    if pol not in ("soft", "hard"):
        raise ValueError("pol must be 'soft' or 'hard'")
    k = 2.0 * math.pi * freq_hz / C0_M_PER_S
    s = np.asarray(source_m, dtype=float)
    r = np.atleast_2d(np.asarray(receivers_m, dtype=float))

    def ang(x, z):
        # Angle about the edge, from the lit face (x = 0-, z < 0, direction -z) toward -x and round.
        return np.mod(np.arctan2(-x, -z), 2.0 * math.pi)

    phi_s = ang(s[0], s[2])
    phi = ang(r[:, 0], r[:, 2])
    sp = math.hypot(s[0], s[2])
    sr = np.hypot(r[:, 0], r[:, 2])
    big_l = sr * sp / (sr + sp)
    sign = -1.0 if pol == "soft" else 1.0

    def a(beta):
        return 2.0 * np.cos(beta / 2.0) ** 2

    bm = phi - phi_s
    bp = phi + phi_s
    # On a shadow boundary F(X)/cos -> finite; step off it by a negligible angle to avoid 0/0.
    bm = np.where(np.abs(np.cos(bm / 2.0)) < 1e-9, bm + 1e-7, bm)
    bp = np.where(np.abs(np.cos(bp / 2.0)) < 1e-9, bp + 1e-7, bp)
    d_coef = -np.exp(-1j * math.pi / 4.0) / (2.0 * math.sqrt(2.0 * math.pi * k)) * (
        _transition(k * big_l * a(bm)) / np.cos(bm / 2.0) + sign * _transition(k * big_l * a(bp)) / np.cos(bp / 2.0)
    )
    u_q = _scalar_source(np.zeros(3), s, freq_hz, pol)
    u_d = u_q * d_coef * np.sqrt(sp / (sr * (sr + sp))) * np.exp(-1j * k * sr)
    u_free = _scalar_source(r, s, freq_hz, pol)
    lit = phi < math.pi + phi_s
    # Reflected ray: the image of a dipole parallel to a conducting plane is reversed, at the mirror
    # point (-x_s, 0, z_s). Then E_y cancels on the plate (soft) and H_y doubles (hard).
    image = np.array([-s[0], s[1], s[2]])
    u_refl = -_scalar_source(r, image, freq_hz, pol)
    refl = phi < math.pi - phi_s
    total = np.where(lit, u_free, 0.0) + np.where(refl, u_refl, 0.0) + u_d
    return total / u_free
