"""Link budget by term: one link (spot, wheel, wheel angle) split into the terms that add up to its level.

The link is re-traced with the engine's own code (core.links.link_rays with ``detail=True``: the
same ray geometry, panel crossings, knife edges, fields and Fresnel coefficients the ranking used),
so the terms cannot drift from the engine: their sum is the engine's received level, dBm
(tests/test_budget.py checks it within 0.01 dB for every spot and wheel of every sample).

Terms (dB, added to the level; losses are negative):

- transmitter: the sensor's peak EIRP as given, or conducted power + antenna gain - mismatch loss
  (-10 log10(1 - 10^(-RL/10)) for the return loss RL);
- antennas: 20 log10 |c| of the bare sensor (short dipole on its axis, no wheel) with the receiver:
  both patterns and the polarization match (Balanis); with the installed wheel pattern, the wheel
  term is the installed field's coupling relative to the bare sensor's, 20 log10 |c_installed / c_bare|;
- free space: 20 log10(lambda / (4 pi d)) at the direct path length d (Friis, ITU-R P.525);
- wheel (knife-edge model): the rim flange's knife edge (ITU-R P.526 J(v)) and the tire exit
  (sidewall or steel-belted tread);
- body: every hull crossing of the direct path with its zone, material and loss; where a passage
  through the hull is cheaper over its dominant edge, a diffraction term that replaces the two
  panels' loss by the knife-edge loss (the passage then costs J);
- road: the road ray's interference with the direct ray, 20 log10 |sum of the rays| / |direct ray|;
  the road ray's own budget is listed beside (not added);
- null floor: where the floor holds the level up, 10 log10(floor power / |sum of the rays|^2);
- cabin field: inside the hull, the diffuse power of the cabin fed through its openings (core.cavity)
  added to the rays, and the fade quantile of the sum (radio.fade_probability, core.links.fade_power):
  10 log10(scored power / floored power of the rays);
- receiver antenna gain.

Margin = level - sensitivity - required margin (the terms ``sensitivity`` and ``required margin``
close the table).

New terms slot in as one more builder in :data:`TERM_BUILDERS`
reading a value the engine exposes in its ray detail; the sum test then covers them too.

References
----------
ITU-R P.525 (free space), ITU-R P.526-15 sec. 4.1 (knife edge), Balanis, Antenna Theory (short
dipole, polarization loss factor), Pozar, Microwave Engineering sec. 2.3 (mismatch loss),
Rappaport, Wireless Communications sec. 4.5-4.6 (Fresnel reflection, two-ray model).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np

from core.geometry import CROSS_WHEELHOUSE, CROSSING_NAMES, start_bits
from core.links import LinkField, LinkRays, level_dbm, link_rays, sensor_states, with_cavity
from core.propagation import mismatch_loss_db

#: amplitudes below this are taken as this in the logarithms (an exact null), 1/m
_TINY = 1e-150


@dataclass(frozen=True)
class Term:
    """One line of a link budget: ``value_db`` is added to the received level (losses negative).

    ``key`` is a stable identifier (``eirp``, ``conducted_power``, ``antenna_gain``, ``mismatch``,
    ``antennas``, ``wheel_pattern``, ``free_space``, ``rim_knife_edge``, ``tire_exit``, ``panel``,
    ``diffraction``, ``road``, ``null_floor``, ``cabin_field``, ``receiver_gain``); ``group`` says which part of the
    link it belongs to; ``note`` how it was obtained."""

    key: str
    group: str
    label: str
    value_db: float
    note: str = ""
    part: str = ""  # for a panel: which part of the body ("zone 'rear window'", "the wheelhouse", "panels in no zone")

    def to_dict(self) -> dict:
        d = {"key": self.key, "group": self.group, "label": self.label, "value_db": round(self.value_db, 3),
             "note": self.note}
        if self.part:
            d["part"] = self.part
        return d


@dataclass(frozen=True)
class LinkBudget:
    """The terms of one link; ``level_dbm`` is their sum (= the engine's level of this link)."""

    spot: str
    position_m: tuple[float, float, float]
    receiver_axis: tuple[float, float, float]
    wheel: str
    angle_deg: float
    at: str  # "worst" (the worst case over the turn), "median" (the sampled angle at the median), or ""
    terms: tuple[Term, ...]
    engine_level_dbm: float  # core.links.level_dbm of the same link (the sum of the terms equals it)
    sensitivity_dbm: float
    required_margin_db: float
    path_m: float
    road_ray: tuple[Term, ...] = ()  # the road ray alone (not part of the sum)
    road_ray_level_dbm: float | None = None

    @property
    def level_dbm(self) -> float:
        """Sum of the terms, dBm."""
        return float(sum(t.value_db for t in self.terms))

    @property
    def margin_db(self) -> float:
        return self.level_dbm - self.sensitivity_dbm - self.required_margin_db

    def to_dict(self) -> dict:
        return {
            "spot": self.spot,
            "wheel": self.wheel,
            "at": self.at,
            "wheel_angle_deg": round(self.angle_deg, 3),
            "position_m": [round(float(c), 4) for c in self.position_m],
            "receiver_axis": [round(float(a), 6) for a in self.receiver_axis],
            "path_length_m": round(self.path_m, 4),
            "terms": [t.to_dict() for t in self.terms],
            "level_dbm": round(self.level_dbm, 3),
            "sensitivity_dbm": self.sensitivity_dbm,
            "required_margin_db": self.required_margin_db,
            "margin_db": round(self.margin_db, 3),
            "road_ray": [t.to_dict() for t in self.road_ray],
            "road_ray_level_dbm": None if self.road_ray_level_dbm is None else round(self.road_ray_level_dbm, 3),
        }


@dataclass
class _Link:
    """What the term builders read: the scene, the rays of all links (detail) and the link index."""

    scene: object
    rays: LinkRays
    n: int
    power: float
    level_dbm: float
    extra: dict = field(default_factory=dict)
    field: LinkField | None = None  # the scored field of all links (rays, cavity and fade)


def _db20(x) -> float:
    return float(20.0 * np.log10(max(abs(complex(x)), _TINY)))


def _xyz(p) -> str:
    return "(" + ", ".join(f"{float(c):.2f}" for c in p) + ") m"


# ----- term builders: each returns the terms of one part of the link --------------------------
def _transmitter(k: _Link) -> list[Term]:
    s = k.scene.vehicle.radio.sensor
    if s.eirp_dbm is not None:
        return [Term("eirp", "transmitter", "sensor EIRP (peak, as given)", float(k.scene.eirp_dbm),
                     "given in the file (peak; a measured EIRP holds the antenna gain and mismatch)")]
    ml = float(mismatch_loss_db(s.return_loss_db))
    return [Term("conducted_power", "transmitter", "sensor conducted power", float(s.conducted_power_dbm),
                 "given in the file"),
            Term("antenna_gain", "transmitter", "sensor antenna gain", float(s.antenna_gain_dbi), "given in the file"),
            Term("mismatch", "transmitter", f"mismatch loss ({s.return_loss_db:g} dB return loss)", -ml,
                 "-10 log10(1 - 10^(-RL/10)) (textbook transmission-line relation)")]


def _antennas(k: _Link) -> list[Term]:
    sc, n = k.scene, k.n
    dd = k.rays.direct_detail
    c = k.rays.direct.c[n]
    rx = "receiver dipole" if sc.receiver_pattern == "dipole" else "isotropic receiver (matched)"
    if sc.sensor_kind == "isotropic":
        return [Term("antennas", "antennas", f"isotropic sensor, {rx}: pattern and polarization", _db20(c),
                     "an isotropic sensor is taken as polarization-matched to the receiver; 20 log10 |c|")]
    bare = dd.bare_c[n]
    out = [Term("antennas", "antennas", f"sensor dipole ({sc.vehicle.radio.sensor.axis}) and {rx}: patterns "
                f"and polarization", _db20(bare),
                "20 log10 |a_s,perp . a_r| of the bare short dipoles (Balanis)")]
    if sc.sensor_kind == "table":
        out.append(Term("wheel_pattern", "wheel", "installed wheel pattern against the bare sensor",
                        _db20(c) - _db20(bare),
                        "the sensor on its rim and tire, NEC-2 table (core.wheel_patterns): 20 log10 "
                        "|c_installed / c_bare|"))
    return out


def _free_space(k: _Link) -> list[Term]:
    d = float(k.rays.direct.d[k.n])
    lam = k.scene.wavelength_m
    return [Term("free_space", "path", f"free-space loss over {d:.3f} m", float(20.0 * np.log10(lam / (4 * np.pi * d))),
                 "Friis (ITU-R P.525)")]


def _wheel(k: _Link) -> list[Term]:
    w = k.rays.direct_detail.wheel
    if w is None:
        return []
    n = k.n
    out = []
    if w.rim_db[n] != 0.0:
        what = "shadowed by the rim barrel" if w.rim_shadowed[n] else "passing the rim flange"
        out.append(Term("rim_knife_edge", "wheel", f"rim flange knife edge ({what})", -float(w.rim_db[n]),
                        f"ITU-R P.526 J(v), v = {float(w.rim_v[n]):.2f}"))
    tread = bool(w.through_tread[n])
    out.append(Term("tire_exit", "wheel", "tire tread (steel belt)" if tread else "tire sidewall", -float(w.tire_db[n]),
                    "material tire_tread" if tread else "material tire_sidewall"))
    return out


def panel_terms(hull, body, n: int, a, b, group: str = "body") -> list[Term]:
    """The terms of path n's hull crossings (core.geometry.BodyTerms of the paths a -> b)."""
    out = []
    sel = np.flatnonzero(body.rows == n)
    pts = a[n] + body.t[sel, None] * (b[n] - a[n])
    for j, p in zip(sel, pts):
        kind, zone = int(body.kind[j]), int(body.zone[j])
        mat = hull.crossing_material(kind, zone)
        zname = hull.crossing_zone(kind, zone)
        where = CROSSING_NAMES.get(kind, "panel")
        into = "into" if body.direction[j] > 0 else "out of"
        if zname:
            what = part = f"zone '{zname}'"
        elif kind == CROSS_WHEELHOUSE:
            what, part = "", "the wheelhouse"
        else:
            what, part = "no zone", "panels in no zone"
        label = f"{into} the body: {where} at {_xyz(p)}" + (f", {what}" if what else "") + f" ({mat})"
        out.append(Term("panel", group, label, -float(body.loss_db[j]), f"material {mat}", part))
    for q in np.flatnonzero(body.p_rows == n):
        pen = float(body.loss_db[body.p_first[q]] + body.loss_db[body.p_first[q] + 1])
        j_db = float(body.p_j_db[q])
        if j_db < pen:
            out.append(Term("diffraction", group, f"diffraction over the body's edge near {_xyz(body.p_edge[q])} "
                            f"instead of the two panels above", pen - j_db,
                            f"ITU-R P.526 knife edge, v = {float(body.p_v[q]):.2f}, J = {j_db:.1f} dB replaces "
                            f"{pen:.1f} dB of penetration"))
    return out


def _body(k: _Link) -> list[Term]:
    dd = k.rays.direct_detail
    return panel_terms(k.scene.hull, dd.body[0], k.n, k.extra["src"], k.extra["dst"])


def _road(k: _Link) -> list[Term]:
    if k.rays.road is None:
        return []
    n = k.n
    direct = _direct_db(k)
    f = k.rays.field()
    total = float(10.0 * np.log10(max(f.re[n] ** 2 + f.im[n] ** 2, _TINY**2)))
    k.extra["sum_db"] = total
    rr = k.rays.road
    rel = _db20(rr.c[n] * 10 ** (-rr.loss_db[n] / 20) / rr.d[n]) - direct
    ph = float(np.degrees(np.angle(rr.c[n] / (k.rays.direct.c[n] if abs(k.rays.direct.c[n]) > 0 else 1.0))
                          - k.rays.phase[n]))
    return [Term("road", "road", "road reflection: interference of the road ray with the direct ray",
                 total - direct, f"road ray {rel:+.1f} dB against the direct ray, phase "
                 f"{(ph + 180.0) % 360.0 - 180.0:+.0f} deg (two-ray model, Fresnel)")]


def _direct_db(k: _Link) -> float:
    """20 log10 of the direct ray's field amplitude |c| 10^(-L/20) / d (1/m)."""
    dr, n = k.rays.direct, k.n
    return _db20(dr.c[n]) - float(dr.loss_db[n]) - float(20.0 * np.log10(dr.d[n]))


def _null_floor(k: _Link) -> list[Term]:
    n = k.n
    f = k.rays.field()
    amp2 = float(f.re[n] ** 2 + f.im[n] ** 2)
    if float(f.floor2[n]) <= amp2:
        return []
    summed = k.extra.get("sum_db", _direct_db(k))
    return [Term("null_floor", "floor", f"null floor ({k.scene.null_floor_db:g} dB below the rays' matched power) "
                 "holds the level", float(10.0 * np.log10(f.floor2[n])) - summed,
                 "exact nulls are not physical (cross-polar discrimination, scattering)")]


def _cabin(k: _Link) -> list[Term]:
    f, n = k.field, k.n
    if f is None or np.ndim(f.diffuse) == 0 and float(f.diffuse) == 0.0:
        return []
    d = float(np.broadcast_to(f.diffuse, f.re.shape)[n])
    if d <= 0.0:
        return []
    coh = float(f.coherent_power()[n])
    q = float(f.fade_q)
    fade = f", level exceeded with probability {1 - q:.3g} (Rician, K = {10 * np.log10(max(coh, _TINY) / d):+.1f} dB)" \
        if q > 0 else " (mean power)"
    return [Term("cabin_field", "cabin", "diffuse cabin field fed through the openings, with its fade",
                 float(10.0 * np.log10(k.power / max(coh, _TINY**2))),
                 f"diffuse {10 * np.log10(d / max(coh, _TINY**2)):+.1f} dB against the rays{fade}; "
                 "power balance of the cabin (Hill), core.cavity")]


def _receiver(k: _Link) -> list[Term]:
    sc = k.scene
    return [Term("receiver_gain", "receiver", "receiver antenna peak gain", float(sc.receiver_gain_dbi),
                 "given in the file (pattern and polarization: antenna term)")]


#: the builders of a budget's terms, in table order; a new engine term adds a builder here
TERM_BUILDERS: list[Callable[[_Link], list[Term]]] = [
    _transmitter, _antennas, _free_space, _wheel, _body, _road, _null_floor, _cabin, _receiver,
]


def _road_ray_terms(k: _Link) -> tuple[tuple[Term, ...], float | None]:
    """The road ray on its own: its terms (not part of the sum) and its level alone, dBm."""
    if k.rays.road is None:
        return (), None
    sc, n = k.scene, k.n
    rr, rd = k.rays.road, k.rays.road_detail
    terms = [Term("free_space", "road ray", f"free-space loss over {float(rr.d[n]):.3f} m (image path)",
                  float(20.0 * np.log10(sc.wavelength_m / (4 * np.pi * rr.d[n]))), "Friis via the image"),
             Term("antennas", "road ray", "sensor field toward the road, reflected, with the receiver", _db20(rr.c[n]),
                  f"|Gamma_TE| = {abs(rd.gamma_te[n]):.2f}, |Gamma_TM| = {abs(rd.gamma_tm[n]):.2f} at "
                  f"{np.degrees(rd.grazing[n]):.1f} deg grazing, road point {_xyz(rd.point[n])}")]
    if rd.wheel is not None:
        terms.append(Term("wheel", "road ray", "wheel (rim knife edge and tire exit)", -float(rd.wheel.total_db[n])))
    terms.append(Term("body", "road ray", "body crossings of both legs", -float(rd.body_db[n])))
    lvl = float(sc.eirp_dbm + sc.receiver_gain_dbi + sum(t.value_db for t in terms))
    return tuple(terms), lvl


def link_budgets(scene, positions, axes, wheel_index, theta_rad, names=None, at=None) -> list[LinkBudget]:
    """Budgets of N links: receivers at ``positions`` (N, 3) m with unit antenna ``axes`` (N, 3), sensors of
    wheels ``wheel_index`` (N,) at wheel angles ``theta_rad`` (N,). ``names`` / ``at`` label each budget."""
    pos = np.atleast_2d(np.asarray(positions, float))
    ax = np.atleast_2d(np.asarray(axes, float))
    ax = ax / np.linalg.norm(ax, axis=1, keepdims=True)
    wi = np.asarray(wheel_index, int).reshape(-1)
    th = np.asarray(theta_rad, float).reshape(-1)
    src, s_axis, bits0 = sensor_states(scene, wi, th)
    spot_bits = start_bits(scene.hull, pos[:, 0], pos[:, 1], pos[:, 2]) if scene.ground_reflection else None
    rays = link_rays(scene, wi, th, src, s_axis, bits0, pos, ax, spot_bits, detail=True)
    scored = with_cavity(scene, rays.field(), wi, th, pos, ax)
    power = scored.power()
    levels = level_dbm(scene, power)
    out = []
    for n in range(len(pos)):
        k = _Link(scene, rays, n, float(power[n]), float(levels[n]), {"src": src, "dst": pos}, scored)
        terms = [t for b in TERM_BUILDERS for t in b(k)]
        road, road_level = _road_ray_terms(k)
        out.append(LinkBudget(
            spot=names[n] if names is not None else "", position_m=tuple(float(c) for c in pos[n]),
            receiver_axis=tuple(float(a) for a in ax[n]), wheel=scene.wheel_ids[wi[n]],
            angle_deg=float(np.degrees(th[n]) % 360.0), at=at[n] if at is not None else "", terms=tuple(terms),
            engine_level_dbm=float(levels[n]), sensitivity_dbm=scene.sensitivity_dbm,
            required_margin_db=scene.required_margin_db, path_m=float(rays.direct.d[n]), road_ray=road,
            road_ray_level_dbm=road_level))
    return out


def median_angle_index(levels_dbm: np.ndarray) -> np.ndarray:
    """Index of the sampled angle whose level is nearest the median over the turn (first of equals), (...)."""
    med = np.median(levels_dbm, axis=-1)
    return np.argmin(np.abs(levels_dbm - med[..., None]), axis=-1)


def spot_budgets(scene, scores, axes, spots=None, wheels: str = "worst") -> dict[int, dict[str, LinkBudget]]:
    """Budgets of the scored spots at their worst case over the turn and at the median angle.

    ``scores``: core.scoring.SpotScores; ``axes`` (S, 3): the receiver axes they were scored with;
    ``spots``: indices (default all); ``wheels``: "worst" (each spot's limiting wheel) or "all".
    Returns {spot index: {"worst": budget, "median": budget}} (with "all": keys "worst WHEEL" and
    "median WHEEL" per wheel). With a percentile statistic (radio.worst_case_percentile) the "worst" link is
    the sample at the angle the scores name (the highest level at or below the percentile, which itself
    interpolates between samples)."""
    idx = list(range(len(scores.names))) if spots is None else [int(i) for i in spots]
    axes = np.atleast_2d(np.asarray(axes, float))
    rows = []
    for i in idx:
        ws = [int(scores.worst_wheel[i])] if wheels == "worst" else range(len(scores.wheel_ids))
        for w in ws:
            a = int(median_angle_index(scores.levels_dbm[i, w]))
            suffix = "" if wheels == "worst" else f" {scores.wheel_ids[w]}"
            rows.append((i, w, np.radians(scores.worst_angle_deg[i, w]), "worst" + suffix))
            rows.append((i, w, scene.angles_rad[a], "median" + suffix))
    if not rows:
        return {}
    ii = np.array([r[0] for r in rows])
    res = link_budgets(scene, scores.positions[ii], axes[ii], [r[1] for r in rows], [r[2] for r in rows],
                       names=[scores.names[i] for i in ii], at=[r[3].split(" ")[0] for r in rows])
    out: dict[int, dict[str, LinkBudget]] = {}
    for (i, _w, _t, key), b in zip(rows, res):
        out.setdefault(i, {})[key] = b
    return out
