"""Compiled link field (numba): every term of core.links.link_field for N links in one parallel loop.

The pure-numpy code of :mod:`core.links` (``link_rays`` then ``LinkRays.field`` and ``with_cavity``)
is the reference; this module computes the same :class:`core.links.LinkField`, link by link:

- the direct ray: direction and length (held at ``MIN_PATH_M``), the sensor's field toward it (short
  dipole: the axis' part perpendicular to the ray; isotropic: unit field along the projected reference
  axis), its coupling with the receiver (dipole: E . a_r; isotropic: |E|, matched), the body loss of
  the path (core.kernels' compiled hull crossings) and the knife-edge wheel loss (as
  core.wheel.wheel_loss_parts: rim flange knife edge, ITU-R P.526-15 eq. 26 and 31, and the tire exit);
- the road ray (image method): road point, Fresnel coefficients of the road for TE and TM
  (core.propagation.fresnel_reflection), the reflected field's coupling, the body loss of both legs
  and the wheel loss of the sensor -> road leg, the phase lag k (d_r - d);
- the coherent sum relative to the direct ray's phase and the null floor f^2 sum |g|^2;
- the cabin's diffuse power: core.cavity.Cavity.input_at (periodic interpolation in dB over the
  tabulated wheel angles) times the receiver's diffuse factor.

With the installed wheel pattern (``sensor_kind == "table"``) the sensor field is looked up by
core.wheel_patterns in numpy beforehand and handed to the kernel; everything else is compiled.
:func:`fade_power` is the compiled form of core.links.fade_power (the Rician q-quantile table).

Which path runs follows core.kernels (``WHEELREACH_KERNEL``, numba importable, warm-up finished).

Compilation cache: numba keys a cached function by its own source file only, so after editing
core/kernels.py (whose compiled helpers this module calls) touch this file or remove its cache
files (``core/__pycache__/link_kernel*.nbi``/``.nbc``) so that they are rebuilt.

References
----------
ITU-R P.526-15 sec. 4.1 (knife edge), ITU-R P.525 (free space), Rappaport, Wireless Communications
sec. 4.5-4.6 (Fresnel reflection, two-ray model), Hill et al., IEEE Trans. EMC 36(3), 1994 (cavity
power balance, through core.cavity), S. O. Rice (1944-45, Rician fading, through core.links).
"""

from __future__ import annotations

import cmath
import math

import numpy as np

from core import kernels

_KIND = {"dipole": 0, "isotropic": 1, "table": 2}
_LN10 = math.log(10.0)

if kernels.numba is not None:
    from numba import njit, prange

    from core.kernels import _segments

    @njit(cache=True, error_model="numpy", inline="always")
    def _knife_db(v):
        """ITU-R P.526-15 eq. 31 (core.propagation.knife_edge_loss_db), nan for nan."""
        if math.isnan(v):
            return np.nan
        if v > -0.78:
            x = max(v, -0.78) - 0.1
            return 6.9 + 20.0 * math.log10(math.hypot(x, 1.0) + x)
        return 0.0

    @njit(cache=True, error_model="numpy", inline="always")
    def _wheel_loss(wp, sx0, sy0, sz0, ex0, ey0, ez0, lam, sidewall, tread):
        """Knife-edge wheel loss, dB, of one path (core.wheel.wheel_loss_parts, same arithmetic).

        wp: (cx, cy, cz, outboard sign, barrel radius, rim radius, tire radius, rim width, tire width)."""
        cx, cy, cz, sgn = wp[0], wp[1], wp[2], wp[3]
        barrel, rim_r, tire_r, rim_w, tire_w = wp[4], wp[5], wp[6], wp[7], wp[8]
        sx, sz, sw = sx0 - cx, sz0 - cz, sgn * (sy0 - cy)
        ex, ez, ew = ex0 - cx, ez0 - cz, sgn * (ey0 - cy)
        dx, dz, dw = ex - sx, ez - sz, ew - sw
        length = max(math.sqrt(dx * dx + dz * dz + dw * dw), 1e-9)
        ux, uz, uw = dx / length, dz / length, dw / length
        qa = ux * ux + uz * uz
        qb = 2.0 * (sx * ux + sz * uz)
        solvable = qa > 1e-12
        two_qa = 2.0 * (qa if solvable else 1.0)
        rho2 = sx * sx + sz * sz
        qb2 = qb * qb
        qa4 = 4.0 * qa
        half_w = 0.5 * rim_w
        # 1. into the rim barrel?
        disc = qb2 - qa4 * (rho2 - barrel * barrel)
        ok_b = disc > 0 and solvable
        tb1 = (-qb - math.sqrt(disc if ok_b else 0.0)) / two_qa
        wb = sw + tb1 * uw
        enters = ok_b and tb1 > 1e-9 and tb1 < length and abs(wb) <= half_w
        # 2. knife edge over the receiver-side flange
        flange_w = half_w if uw >= 0.0 else -half_w
        axial = abs(uw) > 1e-12
        uw_safe = uw if axial else 1e-12
        tf = (flange_w - sw) / uw_safe
        crosses = axial and tf > 0.0 and tf < length
        rho_f = math.hypot(sx + tf * ux, sz + tf * uz)
        lit_edge = crosses and rho_f < tire_r
        rim_db = 0.0
        if enters or lit_edge:
            d1 = tf if crosses else 1.0
            d2 = length - tf if crosses else 1.0
            use_axial = enters and not crosses
            if use_axial:
                h = half_w - abs(min(max(wb, -half_w), half_w))
                d1 = max(tb1, 1e-6)
                d2 = max(length - tb1, 1e-6)
            else:
                h = rim_r - rho_f
                d1 = max(d1, 1e-6)
                d2 = max(d2, 1e-6)
            rim_db = _knife_db(h * math.sqrt(2.0 / lam * (1.0 / d1 + 1.0 / d2)))
        # 3. the tire exit: tread (steel belt) or sidewall
        disc = qb2 - qa4 * (rho2 - tire_r * tire_r)
        ok_t = disc > 0 and solvable
        tt2 = (-qb + math.sqrt(disc if ok_t else 0.0)) / two_qa
        t_tread = tt2 if (ok_t and tt2 > 0) else np.inf
        half_tw = 0.5 * tire_w
        side_w = half_tw if uw >= 0.0 else -half_tw
        t_side = (side_w - sw) / uw_safe if axial else np.inf
        if not t_side > 0:
            t_side = np.inf
        through_tread = (not enters) and t_tread < t_side and t_tread < length
        return rim_db + (tread if through_tread else sidewall)

    @njit(cache=True, error_model="numpy", inline="always")
    def _field_toward(kind, rx_dipole, s0, s1, s2, r0, r1, r2, u0, u1, u2):
        """Real sensor field toward unit u (core.links.sensor_field, dipole or isotropic)."""
        if kind == 0:
            a0, a1, a2 = s0, s1, s2
        elif rx_dipole:
            a0, a1, a2 = r0, r1, r2
        else:
            a0, a1, a2 = s0, s1, s2
        p = a0 * u0 + a1 * u1 + a2 * u2
        e0, e1, e2 = a0 - p * u0, a1 - p * u1, a2 - p * u2
        if kind == 1:
            n = max(math.sqrt(e0 * e0 + e1 * e1 + e2 * e2), 1e-12)
            e0, e1, e2 = e0 / n, e1 / n, e2 / n
        return e0, e1, e2

    @njit(cache=True, error_model="numpy", inline="always")
    def _bilinear1(grid, w, step_t, n_t, n_p, t, p):
        """core.wheel_patterns._bilinear at one direction (polar t, azimuth p, rad) of wheel w's wrapped
        (T, P+1, 3) grid: the same corner weights, summed in the same order."""
        step_p = 2.0 * np.pi / n_p
        ft = t / step_t
        i0 = min(max(int(np.floor(ft)), 0), n_t - 2)
        ft = min(max(ft - i0, 0.0), 1.0)
        fp = p / step_p
        j0 = min(max(int(np.floor(fp)), 0), n_p - 1)
        fp = min(max(fp - j0, 0.0), 1.0)
        w00 = (1 - ft) * (1 - fp)
        w01 = (1 - ft) * fp
        w10 = ft * (1 - fp)
        w11 = ft * fp
        e0 = grid[w, i0, j0, 0] * w00 + grid[w, i0, j0 + 1, 0] * w01 + grid[w, i0 + 1, j0, 0] * w10 \
            + grid[w, i0 + 1, j0 + 1, 0] * w11
        e1 = grid[w, i0, j0, 1] * w00 + grid[w, i0, j0 + 1, 1] * w01 + grid[w, i0 + 1, j0, 1] * w10 \
            + grid[w, i0 + 1, j0 + 1, 1] * w11
        e2 = grid[w, i0, j0, 2] * w00 + grid[w, i0, j0 + 1, 2] * w01 + grid[w, i0 + 1, j0, 2] * w10 \
            + grid[w, i0 + 1, j0 + 1, 2] * w11
        return e0, e1, e2

    @njit(cache=True, error_model="numpy")
    def _installed_field(tab, grid, near, w, u0, u1, u2, theta, dist):
        """The installed wheel pattern's field toward unit u at wheel angle theta and path length dist
        (core.wheel_patterns.field_vectors, reference "sensor", with the near-field term, divided by
        sqrt(1.5) as core.links.sensor_field does). tab[w]: step_t, n_t, n_p, near step_t, n_t, n_p,
        has near, wavenumber, outboard sign, sensor offset, sensor radius, NEAR_MIN_RADIUS_M, NEAR_FULL_M,
        NEAR_NONE_M, BARE_PEAK_FIELD."""
        tw = tab[w]
        sg = tw[8]
        nrm = max(math.sqrt(u0 * u0 + u1 * u1 + u2 * u2), 1e-300)
        d0, d1, d2 = u0 / nrm, u1 / nrm, u2 / nrm
        c, s = math.cos(theta), math.sin(theta)
        dx, dy, dz = d0, sg * d1, d2
        w0, w1, w2 = c * dx - s * dz, dy, s * dx + c * dz
        q0, q1, q2 = dist * w0 + 0.0, dist * w1 + tw[9], dist * w2 + tw[10]
        r = math.sqrt(q0 * q0 + q1 * q1 + q2 * q2)
        rr = max(r, 1e-300)
        v0, v1, v2 = q0 / rr, q1 / rr, q2 / rr
        t = math.acos(min(max(v2, -1.0), 1.0))
        p = math.atan2(v1, v0) % (2.0 * np.pi)
        e0, e1, e2 = _bilinear1(grid, w, tw[0], int(tw[1]), int(tw[2]), t, p)
        dot = e0 * v0 + e1 * v1 + e2 * v2
        e0, e1, e2 = e0 - dot * v0, e1 - dot * v1, e2 - dot * v2
        if tw[6] != 0.0:
            n0, n1, n2 = _bilinear1(near, w, tw[3], int(tw[4]), int(tw[5]), t, p)
            rn = max(r, tw[11])
            wt = min(max((tw[13] - r) / (tw[13] - tw[12]), 0.0), 1.0)
            e0, e1, e2 = e0 + (n0 / rn) * wt, e1 + (n1 / rn) * wt, e2 + (n2 / rn) * wt
        dd = max(dist, 1e-300)
        f = dd / rr * cmath.exp(-1j * tw[7] * (r - dd))
        e0, e1, e2 = e0 * f, e1 * f, e2 * f
        mag = math.sqrt(abs(e0) ** 2 + abs(e1) ** 2 + abs(e2) ** 2)
        if r < tw[11] and mag > tw[14]:
            cap = tw[14] / max(mag, 1e-300)
            e0, e1, e2 = e0 * cap, e1 * cap, e2 * cap
        k = math.sqrt(1.5)
        return (c * e0 + s * e2) / k, (sg * e1) / k, (-s * e0 + c * e2) / k

    @njit(cache=True, error_model="numpy")
    def _chunk(lo, hi, grid_m, src, s_axis, bits0, theta, wheel, dst, r_axis, spot_bits, dfac, e_dir, e_road, tabs,
               wheels, cav_db, opt, eps, hullt, n_samples, out, ev_t, ev_b, ev_o, fl_t, fl_l, fl_d, body, g_pt):
        """The link field of links [lo, hi) into out (4, N): re, im, floor2, diffuse.

        Link i takes the sensor state (src, s_axis, bits0, theta, wheel) of row si and the receiver (dst,
        r_axis, spot_bits, dfac) of row di: si = i % grid_m, di = i // grid_m when grid_m > 0 (every sensor
        state for every receiver, receiver-major), else si = di = i. e_dir, e_road (installed pattern) by i.
        Scratch: body (3, hi - lo) the legs' body losses, g_pt (hi - lo, 3) the road points. The body losses
        of the chunk are traced first, leg by leg (one tight loop each: core.kernels._segments)."""
        kind = int(opt[0])
        rx_dipole = opt[1] != 0.0
        road = opt[2] != 0.0
        use_wheel = opt[3] != 0.0
        sidewall, tread, lam, wavenumber, floor_ratio = opt[4], opt[5], opt[6], opt[7], opt[8]
        has_cav = opt[9] != 0.0
        min_path = opt[10]
        top_seg, side_seg, wh, arch, arch_bits, arch_mem_off, arch_mem, tz_pip, tz_off, tz_zmin, tz_zmax, \
            tz_loss, sz_pip, sz_off, sz_loss, env, box, default_loss, wheelhouse_loss = hullt
        n_cav = cav_db.shape[1]
        two_pi = 2.0 * np.pi
        m_s = max(0, grid_m)  # _segments' row modes: sensor rows i % grid_m, receiver rows i // grid_m
        m_r = -grid_m if grid_m > 0 else 0
        zero = np.int64(0)  # not the literal 0: literal arguments would compile _segments once more per pattern
        _segments(lo, hi, body[0], src, dst, bits0, top_seg, side_seg, wh, arch, arch_bits, arch_mem_off, arch_mem,
                  tz_pip, tz_off, tz_zmin, tz_zmax, tz_loss, sz_pip, sz_off, sz_loss, env, box, default_loss,
                  wheelhouse_loss, lam, n_samples, ev_t, ev_b, ev_o, fl_t, fl_l, fl_d, m_s, m_r, zero, lo)
        if road:
            for i in range(lo, hi):
                si = i % grid_m if grid_m > 0 else i
                di = i // grid_m if grid_m > 0 else i
                sz = src[si, 2]
                rz = dst[di, 2]
                tg = sz / max(sz + rz, 1e-9)  # the road point: on the line image -> receiver at z = 0
                g_pt[i - lo, 0] = src[si, 0] + tg * (dst[di, 0] - src[si, 0])
                g_pt[i - lo, 1] = src[si, 1] + tg * (dst[di, 1] - src[si, 1])
                g_pt[i - lo, 2] = 0.0
            # sensor -> road point, and the receiver -> road point (traced from the receiver, its own bits)
            _segments(lo, hi, body[1], src, g_pt, bits0, top_seg, side_seg, wh, arch, arch_bits, arch_mem_off,
                      arch_mem, tz_pip, tz_off, tz_zmin, tz_zmax, tz_loss, sz_pip, sz_off, sz_loss, env, box,
                      default_loss, wheelhouse_loss, lam, n_samples, ev_t, ev_b, ev_o, fl_t, fl_l, fl_d, m_s, zero,
                      lo, lo)
            _segments(lo, hi, body[2], dst, g_pt, spot_bits, top_seg, side_seg, wh, arch, arch_bits, arch_mem_off,
                      arch_mem, tz_pip, tz_off, tz_zmin, tz_zmax, tz_loss, sz_pip, sz_off, sz_loss, env, box,
                      default_loss, wheelhouse_loss, lam, n_samples, ev_t, ev_b, ev_o, fl_t, fl_l, fl_d, m_r, zero,
                      lo, lo)
        for i in range(lo, hi):
            if grid_m > 0:
                si = i % grid_m
                di = i // grid_m
            else:
                si = i
                di = i
            w = wheel[si]
            sx, sy, sz = src[si, 0], src[si, 1], src[si, 2]
            rx, ry, rz = dst[di, 0], dst[di, 1], dst[di, 2]
            s0, s1, s2 = s_axis[si, 0], s_axis[si, 1], s_axis[si, 2]
            a0, a1, a2 = r_axis[di, 0], r_axis[di, 1], r_axis[di, 2]
            # direct ray
            v0, v1, v2 = rx - sx, ry - sy, rz - sz
            n = math.sqrt(v0 * v0 + v1 * v1 + v2 * v2)
            nn = max(n, 1e-12)
            u0, u1, u2 = v0 / nn, v1 / nn, v2 / nn
            d = max(n, min_path)
            if kind == 2:
                e0, e1, e2 = e_dir[i, 0], e_dir[i, 1], e_dir[i, 2]
            elif kind == 3:
                e0, e1, e2 = _installed_field(tabs[0], tabs[1], tabs[2], w, u0, u1, u2, theta[si], d)
            else:
                f0, f1, f2 = _field_toward(kind, rx_dipole, s0, s1, s2, a0, a1, a2, u0, u1, u2)
                e0, e1, e2 = complex(f0), complex(f1), complex(f2)
            if rx_dipole:
                c_d = e0 * a0 + e1 * a1 + e2 * a2
                p0 = p1 = p2 = 0j
            else:
                nd = math.sqrt(abs(e0) ** 2 + abs(e1) ** 2 + abs(e2) ** 2)
                ndd = max(nd, 1e-12)
                p0, p1, p2 = e0 / ndd, e1 / ndd, e2 / ndd  # the direct ray's polarization
                c_d = complex(nd)
            loss = body[0, i - lo]
            if use_wheel:
                loss += _wheel_loss(wheels[w], sx, sy, sz, rx, ry, rz, lam, sidewall, tread)
            g = 10.0 ** (-loss / 20.0) / d
            f_re = c_d.real * g
            f_im = c_d.imag * g
            fl2 = g * g
            if road:
                w0, w1, w2 = rx - sx, ry - sy, rz + sz  # receiver - image of the sensor
                nr = math.sqrt(w0 * w0 + w1 * w1 + w2 * w2)
                nrr = max(nr, 1e-12)
                ur0, ur1, ur2 = w0 / nrr, w1 / nrr, w2 / nrr
                d_r = max(nr, min_path)
                ui0, ui1, ui2 = ur0, ur1, -ur2
                gx, gy = g_pt[i - lo, 0], g_pt[i - lo, 1]
                if kind == 2:
                    q0, q1, q2 = e_road[i, 0], e_road[i, 1], e_road[i, 2]
                elif kind == 3:
                    q0, q1, q2 = _installed_field(tabs[0], tabs[1], tabs[2], w, ui0, ui1, ui2, theta[si], d_r)
                else:
                    h0, h1, h2 = _field_toward(kind, rx_dipole, s0, s1, s2, a0, a1, a2, ui0, ui1, ui2)
                    q0, q1, q2 = complex(h0), complex(h1), complex(h2)
                # TE unit vector Z x u_i (y axis for a vertical ray), TM vector n_te x u_i
                m0, m1 = -ui1, ui0
                ml = math.sqrt(m0 * m0 + m1 * m1)
                if ml < 1e-9:
                    n0, n1, n2 = 0.0, 1.0, 0.0
                else:
                    mll = max(ml, 1e-12)
                    n0, n1, n2 = m0 / mll, m1 / mll, 0.0
                t0 = n1 * ui2 - n2 * ui1
                t1 = n2 * ui0 - n0 * ui2
                t2 = n0 * ui1 - n1 * ui0
                sin_psi = min(max(ur2, 0.0), 1.0)  # the grazing angle's sine (and cos^2 = 1 - sin^2)
                q = cmath.sqrt(eps - (1.0 - sin_psi * sin_psi))
                g_perp = (sin_psi - q) / (sin_psi + q)
                g_par = (eps * sin_psi - q) / (eps * sin_psi + q)
                e_te = q0 * n0 + q1 * n1 + q2 * n2
                e_tm = q0 * t0 + q1 * t1 + q2 * t2
                a_te = g_perp * e_te
                a_tm = g_par * e_tm
                er0 = a_te * n0 - a_tm * t0
                er1 = a_te * n1 - a_tm * t1
                er2 = a_te * n2 + a_tm * t2  # t_tm = t_i mirrored in z
                if rx_dipole:
                    c_r = er0 * a0 + er1 * a1 + er2 * a2
                else:
                    c_r = er0 * p0.conjugate() + er1 * p1.conjugate() + er2 * p2.conjugate()
                loss_r = body[1, i - lo] + body[2, i - lo]
                if use_wheel:
                    loss_r += _wheel_loss(wheels[w], sx, sy, sz, gx, gy, 0.0, lam, sidewall, tread)
                g_r = 10.0 ** (-loss_r / 20.0) / d_r
                b = c_r * g_r
                ph = wavenumber * (d_r - d)
                cs, sn = math.cos(ph), math.sin(ph)
                f_re = f_re + (b.real * cs + b.imag * sn)
                f_im = f_im + (b.imag * cs - b.real * sn)
                fl2 = fl2 + g_r * g_r
            out[0, i] = f_re
            out[1, i] = f_im
            out[2, i] = floor_ratio * fl2
            if has_cav:
                th = theta[si] % two_pi
                fr = th / two_pi * n_cav
                fl = math.floor(fr)
                i0 = int(fl) % n_cav
                t = fr - fl
                i1 = (i0 + 1) % n_cav
                out[3, i] = 10.0 ** ((cav_db[w, i0] * (1.0 - t) + cav_db[w, i1] * t) / 10.0) * dfac[di]
            else:
                out[3, i] = 0.0

    @njit(cache=True, error_model="numpy", nogil=True)
    def _links_serial(n, grid_m, src, s_axis, bits0, theta, wheel, dst, r_axis, spot_bits, dfac, e_dir, e_road,
                      tabs, wheels, cav_db, opt, eps, hullt, n_samples, n_chunks):
        """:func:`_links_parallel` on the calling thread (small calls: no thread-pool launch)."""
        out = np.zeros((4, n))
        cap = hullt[0].shape[0] + hullt[1].shape[0] + 4 * hullt[3].shape[0] + hullt[2].shape[0] + 1
        zero = np.int64(0)  # not the literal 0: the parallel loop's _chunk signature, compiled once
        _chunk(zero, n, grid_m, src, s_axis, bits0, theta, wheel, dst, r_axis, spot_bits, dfac, e_dir, e_road, tabs,
               wheels, cav_db, opt, eps, hullt, n_samples, out, np.empty(cap), np.empty(cap, np.int64),
               np.empty(cap, np.int64), np.empty(cap), np.empty(cap), np.empty(cap, np.int8), np.zeros((3, n)),
               np.zeros((n, 3)))
        return out

    @njit(cache=True, error_model="numpy", nogil=True, parallel=True)
    def _links_parallel(n, grid_m, src, s_axis, bits0, theta, wheel, dst, r_axis, spot_bits, dfac, e_dir, e_road,
                        tabs, wheels, cav_db, opt, eps, hullt, n_samples, n_chunks):
        """The link field (4, n) of n links: re, im, floor2, diffuse (see :func:`_chunk`); chunks in parallel."""
        out = np.zeros((4, n))
        cap = hullt[0].shape[0] + hullt[1].shape[0] + 4 * hullt[3].shape[0] + hullt[2].shape[0] + 1
        for c in prange(n_chunks):
            lo = c * n // n_chunks
            hi = (c + 1) * n // n_chunks
            _chunk(lo, hi, grid_m, src, s_axis, bits0, theta, wheel, dst, r_axis, spot_bits, dfac, e_dir, e_road,
                   tabs, wheels, cav_db, opt, eps, hullt, n_samples, out, np.empty(cap), np.empty(cap, np.int64),
                   np.empty(cap, np.int64), np.empty(cap), np.empty(cap), np.empty(cap, np.int8),
                   np.zeros((3, hi - lo)), np.zeros((hi - lo, 3)))
        return out

    @njit(cache=True, error_model="numpy", inline="always")
    def _fade1(c, d, lk_lo, lk_hi, g, z_q):
        """core.links.fade_power of one value: coherent power c plus diffuse power d held at the q-quantile (the
        table interpolation in log K, the Rayleigh and normal limits; same arithmetic)."""
        tot = c + d
        if not d > 0.0:
            return tot
        n_tab = g.shape[0] - 1
        lk = np.log10(c / d)
        x = (min(max(lk, lk_lo), lk_hi) - lk_lo) * (n_tab / (lk_hi - lk_lo))
        j = min(int(x), n_tab - 1)
        f = x - j
        gk = math.exp((g[j] * (1.0 - f) + g[j + 1] * f) * _LN10)
        if lk > lk_hi:
            kk = 10.0 ** min(lk, 300.0)
            gk = (math.sqrt(kk) + z_q / math.sqrt(2.0)) ** 2 / (kk + 1.0)
        return tot * gk

    @njit(cache=True, error_model="numpy", inline="always")
    def _fade_range(lo, hi, coh, dif, lk_lo, lk_hi, g, z_q, out):
        """:func:`_fade1` over [lo, hi) of flat arrays."""
        for i in range(lo, hi):
            out[i] = _fade1(coh[i], dif[i], lk_lo, lk_hi, g, z_q)

    @njit(cache=True, error_model="numpy", inline="always")
    def _quad_range(lo, hi, v, f0, f2, g0, g2, tgrid, lk_lo, lk_hi, g, z_q, fade_on, idx, val):
        """Smallest scored power on the grid tgrid of the complex quadratic v0 + B t + C t^2 (v rows: v0 re, im,
        B re, im, C re, im) with the floor and the diffuse power linear in t (core.turn_minimum), rows [lo, hi):
        its first grid index and value."""
        for i in range(lo, hi):
            best = np.inf
            k_best = 0
            for k in range(tgrid.shape[0]):
                t = tgrid[k]
                qr = v[0, i] + t * (v[2, i] + t * v[4, i])
                qi = v[1, i] + t * (v[3, i] + t * v[5, i])
                c = max(qr * qr + qi * qi, f0[i] + t * (f2[i] - f0[i]))
                d = g0[i] + t * (g2[i] - g0[i])
                p = _fade1(c, d, lk_lo, lk_hi, g, z_q) if fade_on else c + d
                if p < best:
                    best = p
                    k_best = k
            idx[i] = k_best
            val[i] = best

    @njit(cache=True, error_model="numpy", nogil=True)
    def _quad_serial(v, f0, f2, g0, g2, tgrid, lk_lo, lk_hi, g, z_q, fade_on, n_chunks):
        n = f0.shape[0]
        idx = np.empty(n, np.int64)
        val = np.empty(n)
        _quad_range(0, n, v, f0, f2, g0, g2, tgrid, lk_lo, lk_hi, g, z_q, fade_on, idx, val)
        return idx, val

    @njit(cache=True, error_model="numpy", nogil=True, parallel=True)
    def _quad_parallel(v, f0, f2, g0, g2, tgrid, lk_lo, lk_hi, g, z_q, fade_on, n_chunks):
        n = f0.shape[0]
        idx = np.empty(n, np.int64)
        val = np.empty(n)
        for c in prange(n_chunks):
            _quad_range(c * n // n_chunks, (c + 1) * n // n_chunks, v, f0, f2, g0, g2, tgrid, lk_lo, lk_hi, g, z_q,
                        fade_on, idx, val)
        return idx, val

    @njit(cache=True, error_model="numpy", nogil=True)
    def _fade_kernel(coh, dif, lk_lo, lk_hi, g, z_q):
        """:func:`_fade_range` over all elements on the calling thread."""
        out = np.empty(coh.shape[0])
        _fade_range(0, coh.shape[0], coh, dif, lk_lo, lk_hi, g, z_q, out)
        return out

    @njit(cache=True, error_model="numpy", nogil=True, parallel=True)
    def _fade_parallel(coh, dif, lk_lo, lk_hi, g, z_q, n_chunks):
        """:func:`_fade_range` in chunks on every thread (elementwise: the same bits as :func:`_fade_kernel`)."""
        n = coh.shape[0]
        out = np.empty(n)
        for c in prange(n_chunks):
            _fade_range(c * n // n_chunks, (c + 1) * n // n_chunks, coh, dif, lk_lo, lk_hi, g, z_q, out)
        return out


def _hull_tuple(hull) -> tuple:
    p = kernels.packed(hull)
    return (p.top_seg, p.side_seg, p.wh, p.arch, p.arch_bits, p.arch_mem_off, p.arch_mem, p.tz_pip, p.tz_off,
            p.tz_zmin, p.tz_zmax, p.tz_loss, p.sz_pip, p.sz_off, p.sz_loss, p.env, p.box, p.default_loss,
            p.wheelhouse_loss)


_WHEELS: dict[int, tuple] = {}


def _wheel_table(scene) -> np.ndarray:
    """(W, 9) wheel parameters of the scene for :func:`_wheel_loss`, cached by scene identity."""
    hit = _WHEELS.get(id(scene))
    if hit is not None and hit[0] is scene:
        return hit[1]
    tab = np.array([[*w.centre, w.outboard_sign, w.barrel_radius_m, w.rim_radius_m, w.tire_radius_m, w.rim_width_m,
                     w.tire_width_m] for w in scene.wheels], float).reshape(-1, 9)
    if len(_WHEELS) > 32:
        _WHEELS.clear()
    _WHEELS[id(scene)] = (scene, tab, _cavity_db(scene), _pattern_tables(scene) if scene.sensor_kind == "table" else None)
    return tab


_NO_TABLES = (np.zeros((1, 15)), np.zeros((1, 2, 2, 3), complex), np.zeros((1, 2, 2, 3), complex))


def _pattern_tables(scene):
    """The scene's installed wheel patterns packed for :func:`_installed_field` (tab (W, 15), far grids
    (W, T, P+1, 3), near grids), or None when they cannot be packed together (grids of different shapes, a
    near-field term on some wheels only): the sensor field is then looked up in numpy."""
    from core.wheel_patterns import BARE_PEAK_FIELD, NEAR_FULL_M, NEAR_MIN_RADIUS_M, NEAR_NONE_M

    tables = scene.wheel_tables
    if not tables or len({t._grid.shape for t in tables}) != 1:
        return None
    near = [t._near_grid for t in tables]
    if any(n is None for n in near) and not all(n is None for n in near):
        return None
    if not all(n is None for n in near) and len({n.shape for n in near}) != 1:
        return None
    rows = []
    for t, w in zip(tables, scene.wheels):
        has_near = t._near_grid is not None
        nt = t.near_theta_deg if has_near else t.theta_deg
        n_np = len(t.near_phi_deg) if has_near else len(t.phi_deg)
        rows.append([math.radians(t.theta_deg[1] - t.theta_deg[0]), len(t.theta_deg), len(t.phi_deg),
                     math.radians(nt[1] - nt[0]), len(nt), n_np, has_near, t.wavenumber, w.outboard_sign,
                     t.sensor_offset_m, t.sensor_radius_m, NEAR_MIN_RADIUS_M, NEAR_FULL_M, NEAR_NONE_M,
                     BARE_PEAK_FIELD])
    grid = np.ascontiguousarray(np.stack([t._grid for t in tables]), complex)
    near_g = (np.ascontiguousarray(np.stack(near), complex) if near[0] is not None
              else np.zeros((len(tables), 2, 2, 3), complex))
    return np.array(rows, float), grid, near_g


def _cavity_db(scene) -> np.ndarray:
    cav = getattr(scene, "cavity", None)
    if cav is None:
        return np.zeros((1, 1))
    return np.ascontiguousarray(10.0 * np.log10(np.maximum(np.asarray(cav.input, float), 1e-300)))


def _flat(x, shape, dtype=float) -> np.ndarray:
    a = np.ascontiguousarray(np.broadcast_to(np.asarray(x, dtype), shape))
    return a if a.flags.writeable else a.copy()


def _options(scene) -> tuple[np.ndarray, bool]:
    from core.links import MIN_PATH_M

    has_cav = getattr(scene, "cavity", None) is not None
    opt = np.array([_KIND[scene.sensor_kind], scene.receiver_pattern == "dipole", bool(scene.ground_reflection),
                    bool(scene.use_wheel_loss), scene.sidewall_loss_db, scene.tread_loss_db, scene.wavelength_m,
                    scene.wavenumber, 10.0 ** (scene.null_floor_db / 10.0), has_cav, MIN_PATH_M], float)
    return opt, has_cav


def _compiled_tables(scene):
    """The packed installed patterns of a table scene (None: look the sensor field up in numpy)."""
    _wheel_table(scene)
    return _WHEELS[id(scene)][3]


def _run(scene, n: int, grid_m: int, src, s_axis, bits0, theta, wheel, dst, r_axis, spot_bits, dfac, e_dir, e_road):
    """The kernel's (4, n) output: the parallel kernel when its thread pool is free and the call is large, else
    the serial one on the calling thread (bit-identical)."""
    from core.geometry import DIFFRACTION_SAMPLES

    if n == 0:
        return np.zeros((4, 0))
    kernels.warm_up()
    opt, _ = _options(scene)
    wheels = _wheel_table(scene)
    cav_db = _WHEELS[id(scene)][2]
    tabs = _NO_TABLES
    if scene.sensor_kind == "table" and e_dir is _NO_FIELD:
        tabs = _compiled_tables(scene)
        opt[0] = 3  # the installed pattern looked up in the kernel
    threads = kernels.numba.get_num_threads()
    args = (n, grid_m, src, s_axis, bits0, theta, wheel, dst, r_axis, spot_bits, dfac, e_dir, e_road, tabs, wheels,
            cav_db, opt, complex(scene.road_eps), _hull_tuple(scene.hull), DIFFRACTION_SAMPLES, min(n, 16 * threads))
    if threads > 1 and n >= kernels.PARALLEL_MIN_SEGMENTS and kernels._LOCK.acquire(blocking=False):
        try:
            return _links_parallel(*args)
        finally:
            kernels._LOCK.release()
    return _links_serial(*args)


def _field_of(scene, out, shape, has_cav):
    from core.links import LinkField

    fade_q = getattr(scene, "fade_probability", 0.0)
    re, im, f2 = (out[k].reshape(shape) for k in range(3))
    return LinkField(re, im, f2, out[3].reshape(shape) if has_cav else 0.0, fade_q)


_NO_FIELD = np.zeros((1, 3), complex)


def _table_fields(scene, wheel_index, theta, src, s_axis, dst, r_axis):
    """The installed pattern's sensor field toward the direct ray and toward the road point (core.links, numpy)."""
    from core.links import MIN_PATH_M, _sensor_fields, _unit, _wheel_groups

    groups = _wheel_groups(wheel_index, len(src))
    u, d = _unit(dst - src)
    e_dir = np.ascontiguousarray(_sensor_fields(scene, groups, theta, s_axis, u, r_axis, np.maximum(d, MIN_PATH_M)),
                                 complex)
    e_road = _NO_FIELD
    if scene.ground_reflection:
        mirror = np.array([1.0, 1.0, -1.0])
        u_r, d_r = _unit(dst - src * mirror)
        e_road = np.ascontiguousarray(_sensor_fields(scene, groups, theta, s_axis, u_r * mirror, r_axis,
                                                     np.maximum(d_r, MIN_PATH_M)), complex)
    return e_dir, e_road


def _receiver_inputs(scene, points, axes, spot_bits, diffuse_factor):
    """The kernel's per-receiver inputs for receivers at ``points`` (N, 3) with axes (N, 3): hull membership
    bits (computed when the road ray needs them and none were given), the cavity's spot factor (computed when
    the scene has a cavity and none was given), both as flat contiguous arrays of N, and whether the scene has
    a cavity."""
    n = len(points)
    if scene.ground_reflection and spot_bits is None:
        spot_bits = kernels.start_bits(scene.hull, points)
    spot_bits = _flat(np.asarray(0 if spot_bits is None else spot_bits, np.int64).reshape(-1), (n,), np.int64)
    _, has_cav = _options(scene)
    if has_cav and diffuse_factor is None:
        from core.cavity import spot_factor

        diffuse_factor = spot_factor(scene, points, axes)
    dfac = _flat(np.asarray(0.0 if diffuse_factor is None else diffuse_factor, float).reshape(-1), (n,))
    return spot_bits, dfac, has_cav


def link_field(scene, wheel_index, theta, src, s_axis, bits0, dst, r_axis, spot_bits=None, diffuse_factor=None):
    """core.links.link_field (same arguments, same :class:`core.links.LinkField`) by the compiled kernel."""
    src = np.asarray(src, float).reshape(-1, 3)
    n = len(src)
    theta = _flat(np.asarray(theta, float).reshape(-1), (n,))
    src = _flat(src, (n, 3))
    s_axis = _flat(np.asarray(s_axis, float).reshape(-1, 3), (n, 3))
    dst = _flat(np.asarray(dst, float).reshape(-1, 3), (n, 3))
    r_axis = _flat(np.asarray(r_axis, float).reshape(-1, 3), (n, 3))
    bits0 = _flat(np.asarray(bits0, np.int64).reshape(-1), (n,), np.int64)
    wheel = _flat(np.asarray(wheel_index, np.int64).reshape(-1), (n,), np.int64)
    spot_bits, dfac, has_cav = _receiver_inputs(scene, dst, r_axis, spot_bits, diffuse_factor)
    e_dir = e_road = _NO_FIELD
    if scene.sensor_kind == "table" and n and _compiled_tables(scene) is None:
        e_dir, e_road = _table_fields(scene, wheel_index, theta, src, s_axis, dst, r_axis)
    out = _run(scene, n, 0, src, s_axis, bits0, theta, wheel, dst, r_axis, spot_bits, dfac, e_dir, e_road)
    return _field_of(scene, out, (n,), has_cav)


def turn_fields(scene, spots, axes, spot_bits=None, spot_diffuse=None):
    """core.links.turn_fields (every wheel at the scene's sampled angles for spots (S, 3) with receiver axes
    (S, 3); arrays (S, W, A)) by the compiled kernel, which pairs every sensor state with every spot itself
    instead of taking (S W A)-long copies of them."""
    spots = _flat(np.asarray(spots, float).reshape(-1, 3), (len(spots), 3))
    axes = _flat(np.asarray(axes, float).reshape(-1, 3), spots.shape)
    S, W, A = len(spots), len(scene.wheels), len(scene.angles_rad)
    m = W * A
    src = _flat(scene.sensor_pos.reshape(-1, 3), (m, 3))
    s_axis = _flat(scene.sensor_axis.reshape(-1, 3), (m, 3))
    bits0 = _flat(scene.sensor_bits.reshape(-1), (m,), np.int64)
    theta = _flat(np.broadcast_to(scene.angles_rad[None, :], (W, A)).reshape(-1), (m,))
    wheel = _flat(np.repeat(np.arange(W), A), (m,), np.int64)
    spot_bits, dfac, has_cav = _receiver_inputs(scene, spots, axes, spot_bits, spot_diffuse)
    e_dir = e_road = _NO_FIELD
    if scene.sensor_kind == "table" and S and _compiled_tables(scene) is None:
        idx_s = np.repeat(np.arange(S), m)
        idx_m = np.tile(np.arange(m), S)
        e_dir, e_road = _table_fields(scene, wheel[idx_m], theta[idx_m], src[idx_m], s_axis[idx_m], spots[idx_s],
                                      axes[idx_s])
    out = _run(scene, S * m, m, src, s_axis, bits0, theta, wheel, spots, axes, spot_bits, dfac, e_dir, e_road)
    return _field_of(scene, out, (S, W, A), has_cav)


def fade_power(coherent: np.ndarray, diffuse, q: float, table) -> np.ndarray:
    """core.links.fade_power (q > 0, some diffuse power) by the compiled kernel; ``table`` is
    core.links._fade_table(q)."""
    lk_grid, g, _rayleigh, z_q = table
    shape = np.broadcast_shapes(np.shape(coherent), np.shape(diffuse))
    c = np.ascontiguousarray(np.broadcast_to(np.asarray(coherent, float), shape)).reshape(-1)
    d = np.ascontiguousarray(np.broadcast_to(np.asarray(diffuse, float), shape)).reshape(-1)
    c = c if c.flags.writeable else c.copy()
    d = d if d.flags.writeable else d.copy()
    args = (c, d, float(lk_grid[0]), float(lk_grid[-1]), np.ascontiguousarray(g), float(z_q))
    kernels.warm_up()
    threads = kernels.numba.get_num_threads()
    if threads > 1 and len(c) >= 4 * kernels.PARALLEL_MIN_SEGMENTS and kernels._LOCK.acquire(blocking=False):
        try:
            return _fade_parallel(*args, 4 * threads).reshape(shape)
        finally:
            kernels._LOCK.release()
    return _fade_kernel(*args).reshape(shape)


def quad_grid_minimum(v0, bq, cq, f0, f2, g0, g2, tgrid, q: float):
    """The first grid index and the value of the smallest scored power of the complex quadratics
    V(t) = v0 + bq t + cq t^2 on the grid ``tgrid``, with the floor f0 -> f2 and the diffuse power g0 -> g2
    linear in t, held at the fade quantile q (core.turn_minimum's interpolation step; the same arithmetic as
    its numpy form). Arrays of any one shape; returns (index, value) of that shape."""
    from core.links import _fade_table

    shape = np.shape(f0)
    v = np.ascontiguousarray(np.stack([np.real(v0), np.imag(v0), np.real(bq), np.imag(bq), np.real(cq),
                                       np.imag(cq)]).reshape(6, -1), float)
    f0, f2, g0, g2 = (np.ascontiguousarray(np.broadcast_to(np.asarray(x, float), shape)).reshape(-1).copy()
                      for x in (f0, f2, g0, g2))
    fade_on = bool(q > 0.0)  # q = 0: the mean power (fade_power's elementwise rule gives the rest)
    lk_grid, g, _rayleigh, z_q = _fade_table(float(q)) if q > 0.0 else (np.array([-6.0, 4.0]), np.zeros(2), 0.0, 0.0)
    n = len(f0)
    kernels.warm_up()
    threads = kernels.numba.get_num_threads()
    args = (v, f0, f2, g0, g2, np.ascontiguousarray(tgrid, float), float(lk_grid[0]), float(lk_grid[-1]),
            np.ascontiguousarray(g, float), float(z_q), fade_on, min(max(n, 1), 16 * threads))
    out = None
    if threads > 1 and n * len(tgrid) >= 4 * kernels.PARALLEL_MIN_SEGMENTS and kernels._LOCK.acquire(blocking=False):
        try:
            out = _quad_parallel(*args)
        finally:
            kernels._LOCK.release()
    if out is None:
        out = _quad_serial(*args)
    return out[0].reshape(shape), out[1].reshape(shape)


def warm_up() -> None:
    """Compile (or load from the cache) this module's kernels with the engine's argument types."""
    if kernels.numba is None:
        return
    z3 = np.zeros((1, 3))
    i1 = np.zeros(1, np.int64)
    hullt = (np.zeros((0, 4)), np.zeros((0, 4)), np.zeros((0, 5)), np.zeros((0, 3)), np.zeros(0, np.int64),
             np.zeros(1, np.int64), np.zeros(0, np.int64), np.zeros((0, 5)), np.zeros(1, np.int64), np.zeros(0),
             np.zeros(0), np.zeros(0), np.zeros((0, 5)), np.zeros(1, np.int64), np.zeros(0),
             np.zeros((5, 2)), np.array([[0.0, 0.0, 0.0], [1.0, 1.0, 1.0]]), 1.0, 1.0)
    opt = np.zeros(11)
    opt[6] = opt[7] = opt[8] = 1.0
    args = (1, 0, z3.copy(), z3.copy(), i1.copy(), np.zeros(1), i1.copy(), z3 + 1.0, z3.copy(), i1.copy(),
            np.zeros(1), _NO_FIELD.copy(), _NO_FIELD.copy(), tuple(x.copy() for x in _NO_TABLES), np.zeros((1, 9)),
            np.zeros((1, 1)), opt, 1 + 0j, hullt, 8, 1)
    _links_serial(*args)
    with kernels._LOCK:
        _links_parallel(*args)
    fade = (np.ones(1), np.ones(1), -6.0, 4.0, np.zeros(3), 0.0)
    _fade_kernel(*fade)
    with kernels._LOCK:
        _fade_parallel(*fade, 1)
    quad = (np.zeros((6, 1)), np.ones(1), np.ones(1), np.ones(1), np.ones(1), np.linspace(0.0, 1.0, 3), -6.0, 4.0,
            np.zeros(3), 0.0, True, 1)
    _quad_serial(*quad)
    with kernels._LOCK:
        _quad_parallel(*quad)


__all__ = ["fade_power", "link_field", "quad_grid_minimum", "turn_fields", "warm_up"]
