"""What a spot's margin depends on: one-at-a-time sensitivity (tornado) and a Monte-Carlo pass probability.

Uncertain inputs (:func:`uncertain_inputs`), each with a documented range and its source (or
"engineering default"):

- the crossing loss of every panel material the body uses (metal, glass, plastic, composite, the
  wheelhouse material, materials defined in the file); "open" is 0 dB by definition and not varied;
- the tire's tread and sidewall losses (they act in the knife-edge wheel model only: the installed
  wheel pattern holds the tire in its full-wave solution);
- the null floor; the road (reflection off, or each road surface) when the road reflection is on;
- the receiver antenna's tilt, up to 15 deg in any direction from the spot's axis;
- the sensor's peak EIRP, +-3 dB; the sensor's frequency, +-0.2 %.

- the absorption of the cabin's contents (body.cabin_absorption_m2): it sets the level of the cabin's
  diffuse field (core.cavity).

The cabin's diffuse field follows the inputs through :class:`_CabinResponse`: the cavity is rebuilt
with each input at each end of its range (each road outcome), the change of its diffuse power over the
turn tabulated in dB, interpolated piecewise linearly between nominal and the ends, and the inputs'
changes added in dB; the fade quantile (radio.fade_probability) is taken of the recombined rays plus
that diffuse power (core.links.fade_power). The frequency's effect on the cabin field is not varied.

Tornado: the margin of the spot with each input at the ends of its range, the others nominal (for
the tilt: the worst and best of eight tilt directions; for the road: the worst and best of its
outcomes). Monte-Carlo: :data:`DEFAULT_DRAWS` draws with a fixed seed; every ranged input is drawn
from a triangular distribution between the ends of its range with its mode at the nominal value
(common practice for ranges set by engineering judgement), the road outcome and the tilt direction
uniformly; P(pass) = the share of draws with margin >= 0.

Fast model (:class:`PerturbationModel`): the material losses, the tire losses and the EIRP enter the
level additively per ray in dB, so the geometry of every link (which panels each ray crosses, each
passage's knife edge, the sensor fields, the Fresnel coefficients of every road surface) is traced
once with the engine's own code (core.links.link_rays with ``detail=True``) over a dense set of wheel
angles (:data:`DENSE_ANGLES` per turn plus the engine's worst angle of each wheel), and each draw
recombines the two rays coherently and takes the worst case over the angles again (the worst angle
moves with the inputs). The frequency scales the phase between the rays, the free-space term and the
knife-edge parameters; the installed wheel pattern and the road's permittivity are held at the
nominal frequency (their change over +-0.2 % is far below the model's accuracy). Margins are reported
anchored at the engine's margin: engine margin + (fast model at the inputs - fast model at nominal),
so the nominal is exactly the ranking's number. tests/test_sensitivity.py checks the fast model
against a full recomputation (a new Scene and ranking) for every input.

References
----------
Ranges: see each input's ``source``. Tornado diagrams and Monte-Carlo propagation of input
uncertainty: JCGM 101:2008 (GUM Supplement 1, propagation of distributions by a Monte Carlo method).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy import sparse

from core.geometry import start_bits
from core.links import _MIRROR, fade_power, link_rays, sensor_states, with_cavity
from core.materials import (
    ROAD_SURFACES,
    material_loss_db,
    p2040_properties,
    road_permittivity,
    slab_transmission_loss_db,
)
from core.propagation import complex_permittivity, fresnel_reflection, knife_edge_loss_db, knife_edge_loss_slope_db

ENGINEERING_DEFAULT = "engineering default"
#: Monte-Carlo draws per spot and the fixed seed (no run-to-run scatter)
DEFAULT_DRAWS = 200
DEFAULT_SEED = 20240613
#: wheel angles per turn of the fast model; an interval whose ends cross different panels (a jump of the loss) has
#: its jump located by this many bisection steps (1 deg / 2^10: about 0.001 deg) and this many samples either side
DENSE_ANGLES = 360
JUMP_BISECTIONS = 10
JUMP_SIDE_SAMPLES = 5
#: receiver axis tilt range, rad, and the directions the tornado tries
TILT_MAX_RAD = np.radians(15.0)
TILT_DIRECTIONS = 8
#: sensor EIRP range, dB either side of nominal
EIRP_RANGE_DB = 3.0
#: sensor frequency tolerance, relative
FREQUENCY_TOLERANCE = 0.002
#: null floor range, dB either side of nominal
NULL_FLOOR_RANGE_DB = 10.0
#: metal crossing loss range, dB either side of nominal
METAL_RANGE_DB = 10.0
#: plastic / composite: up to this much above nominal, dB
PLASTIC_EXTRA_DB = 3.0
#: glass: up to this much above nominal, dB
GLASS_EXTRA_DB = 2.0
#: glass thickness for the low end of its range (normal-incidence slab), m
GLASS_THICKNESS_M = 0.004
#: tire losses: the builtin materials' stated typical ranges, dB
TIRE_TREAD_RANGE_DB = (8.0, 15.0)
TIRE_SIDEWALL_RANGE_DB = (1.0, 2.0)
#: materials defined in the file: +- this fraction of the value
USER_MATERIAL_FRACTION = 0.5
#: links per work block of the fast model (draws x links)
_BLOCK = 400_000
#: the fast model evaluates in single precision (levels to about 1e-5 dB; the engine's own numbers stay double)
_F = np.float32
_NEG_LN10_20 = _F(-np.log(10.0) / 20.0)

NOT_VARIED = (
    ("seats, occupants and cargo as obstacles", ("the body model has no inner panels: the contents act only "
                                                 "through their absorption of the cabin's diffuse field")),
)
#: absorption cross-section of the cabin's contents, m^2: the range about the nominal (an empty cabin with seats
#: and trim to a full one; one seated adult absorbs roughly 0.3-0.5 m^2 at UHF: value recalled from memory)
CABIN_ABSORPTION_RANGE = (0.4, 4.0)


@dataclass(frozen=True)
class UncertainInput:
    """One uncertain input: nominal value and range in SI units (dB, dBm, Hz, rad), with its source.

    ``kind``: "material" (``name`` is the material), "tire_tread", "tire_sidewall", "null_floor",
    "road" (discrete: ``options`` are the outcomes, -1 = reflection off, k = ROAD_SURFACES' k-th),
    "axis_tilt", "eirp", "frequency", "cabin_absorption". ``effect`` is "" when the input acts in this setup, else why not."""

    key: str
    kind: str
    label: str
    unit: str
    nominal: float
    low: float
    high: float
    source: str
    distribution: str
    name: str = ""
    options: tuple = ()
    effect: str = ""

    def text(self, value: float) -> str:
        """A value of this input in display units."""
        if self.kind == "road":
            return road_outcome_name(int(value))
        if self.kind == "axis_tilt":
            return f"{np.degrees(value):.0f} deg"
        if self.kind == "frequency":
            return f"{value / 1e6:.3f} MHz"
        return f"{value:.1f} {self.unit}"


ROAD_NAMES = tuple(ROAD_SURFACES)


def road_outcome_name(code: int) -> str:
    return "reflection off" if code < 0 else ROAD_NAMES[code]


def _material_input(v, name: str, f: float, used_by: list[str]) -> UncertainInput:
    overrides = {k: m.loss_db for k, m in v.materials.items()}
    nom = float(material_loss_db(name, f, overrides))
    label = f"{name} crossing loss"
    if name in v.materials:
        lo, hi = nom * (1 - USER_MATERIAL_FRACTION), nom * (1 + USER_MATERIAL_FRACTION)
        src = f"{ENGINEERING_DEFAULT}: +-{100 * USER_MATERIAL_FRACTION:.0f} % of the value given in the file"
    elif name == "metal":
        lo, hi = nom - METAL_RANGE_DB, nom + METAL_RANGE_DB
        src = (f"{ENGINEERING_DEFAULT}: +-{METAL_RANGE_DB:g} dB; measured whole-vehicle penetration loss spans "
               "3.2-23.8 dB (Tanghe et al., IEEE Trans. Veh. Technol. 57(4), 2008), 3GPP TR 38.901 sec. 7.4.3.2 "
               "gives a standard deviation of 5 dB")
    elif name == "glass":
        eps_r, sigma, _ = p2040_properties("glass", f)
        lo = float(slab_transmission_loss_db(complex_permittivity(eps_r, sigma, f), GLASS_THICKNESS_M, f))
        hi = nom + GLASS_EXTRA_DB
        src = (f"low: normal-incidence loss of a {GLASS_THICKNESS_M * 1e3:g} mm slab of ITU-R P.2040 Table 3 glass; "
               f"high: +{GLASS_EXTRA_DB:g} dB over 3GPP TR 38.901 standard glass for oblique incidence, tint and "
               f"frames ({ENGINEERING_DEFAULT})")
    elif name in ("plastic", "composite"):
        lo, hi = 0.0, nom + PLASTIC_EXTRA_DB
        src = (f"{ENGINEERING_DEFAULT}: 0 dB (thin, unpainted) to +{PLASTIC_EXTRA_DB:g} dB over the slab value "
               "(metallic paint, ribs, thick sections)")
    else:
        lo, hi = nom * (1 - USER_MATERIAL_FRACTION), nom * (1 + USER_MATERIAL_FRACTION)
        src = f"{ENGINEERING_DEFAULT}: +-{100 * USER_MATERIAL_FRACTION:.0f} %"
    lo, hi = max(0.0, lo), min(100.0, hi)
    return UncertainInput(f"material:{name}", "material", label, "dB", nom, lo, hi, src, "triangular", name=name,
                          effect="" if used_by else "no panel of this material")


def body_materials(v) -> dict[str, list[str]]:
    """The materials the body model uses (metal for panels in no zone, the wheelhouse material, each zone's), with
    where, in a stable order; "open" (0 dB by definition) left out."""
    used: dict[str, list[str]] = {"metal": ["panels in no zone"]}
    used.setdefault(v.body.wheelhouse_material, []).append("wheelhouses")
    for z in v.zones:
        used.setdefault(z.material, []).append(f"zone '{z.name}'")
    used.pop("open", None)
    return used


def uncertain_inputs(v, scene) -> list[UncertainInput]:
    """The uncertain inputs of a vehicle's setup with their nominal values and ranges (SI, dB)."""
    f = scene.freq_hz
    out = [_material_input(v, name, f, where) for name, where in body_materials(v).items()]
    knife = scene.use_wheel_loss
    why = "" if knife else "the installed wheel pattern holds the tire in its full-wave solution (no tire loss term)"
    tr_lo, tr_hi = TIRE_TREAD_RANGE_DB
    sw_lo, sw_hi = TIRE_SIDEWALL_RANGE_DB
    out.append(UncertainInput("tire_tread", "tire_tread", "tire tread (steel belt) loss", "dB", scene.tread_loss_db,
                              min(tr_lo, scene.tread_loss_db), max(tr_hi, scene.tread_loss_db),
                              f"{ENGINEERING_DEFAULT}: the typical range {tr_lo:g}-{tr_hi:g} dB stated with the "
                              "material (core.materials)", "triangular", effect=why))
    out.append(UncertainInput("tire_sidewall", "tire_sidewall", "tire sidewall loss", "dB", scene.sidewall_loss_db,
                              min(sw_lo, scene.sidewall_loss_db), max(sw_hi, scene.sidewall_loss_db),
                              f"{ENGINEERING_DEFAULT}: the typical range {sw_lo:g}-{sw_hi:g} dB stated with the "
                              "material (core.materials)", "triangular", effect=why))
    nf = scene.null_floor_db
    out.append(UncertainInput("null_floor", "null_floor", "null floor", "dB", nf, max(-80.0, nf - NULL_FLOOR_RANGE_DB),
                              min(0.0, nf + NULL_FLOOR_RANGE_DB),
                              f"{ENGINEERING_DEFAULT}: +-{NULL_FLOOR_RANGE_DB:g} dB (cross-polar discrimination "
                              "and scattering of real antennas and structures)", "triangular"))
    surfaces = tuple(range(len(ROAD_NAMES)))
    if scene.ground_reflection:
        nom = float(ROAD_NAMES.index(scene.vehicle.radio.road_surface))
        out.append(UncertainInput("road", "road", "road (off, or surface)", "", nom, -1.0,
                                  float(len(ROAD_NAMES) - 1),
                                  f"{ENGINEERING_DEFAULT}: the road surfaces of ITU-R P.2040 Table 3 (extrapolated "
                                  "below 1 GHz) and no reflection (a rough or wet road, a lift, a turntable)",
                                  "uniform over the outcomes", options=(-1,) + surfaces))
    else:
        out.append(UncertainInput("road", "road", "road (off, or surface)", "", -1.0, -1.0, -1.0,
                                  "the road reflection is off in this setup", "not drawn", options=(-1,),
                                  effect="road reflection off in the setup: not varied"))
    rx_iso = scene.receiver_pattern != "dipole"
    out.append(UncertainInput("axis_tilt", "axis_tilt", "receiver axis tilt", "rad", 0.0, 0.0, float(TILT_MAX_RAD),
                              f"{ENGINEERING_DEFAULT}: up to {np.degrees(TILT_MAX_RAD):.0f} deg in any direction "
                              "(mounting tolerance, bracket, cable pull)",
                              "tilt triangular 0-15 deg with mode 0, direction uniform",
                              effect="isotropic receiver: no axis" if rx_iso else ""))
    e0 = scene.eirp_dbm
    out.append(UncertainInput("eirp", "eirp", "sensor EIRP", "dBm", e0, e0 - EIRP_RANGE_DB, e0 + EIRP_RANGE_DB,
                              f"{ENGINEERING_DEFAULT}: +-{EIRP_RANGE_DB:g} dB (production spread, battery, "
                              "temperature)", "triangular"))
    out.append(UncertainInput("frequency", "frequency", "sensor frequency", "Hz", f, f * (1 - FREQUENCY_TOLERANCE),
                              f * (1 + FREQUENCY_TOLERANCE),
                              f"{ENGINEERING_DEFAULT}: +-{100 * FREQUENCY_TOLERANCE:g} %; at 433.92 MHz this spans "
                              "the 433.05-434.79 MHz band of ERC/REC 70-03 Annex 1 the sensor must stay in",
                              "triangular"))
    a0 = float(v.body.cabin_absorption_m2)
    lo_f, hi_f = CABIN_ABSORPTION_RANGE
    out.append(UncertainInput("cabin_absorption", "cabin_absorption", "cabin contents' absorption", "m^2", a0,
                              a0 * lo_f, a0 * hi_f,
                              f"{ENGINEERING_DEFAULT}: x{lo_f:g} to x{hi_f:g} the file's value (an empty cabin with "
                              "seats and trim to a full one; about 0.3-0.5 m^2 per seated adult at UHF, recalled "
                              "from memory)", "triangular",
                              effect="" if getattr(scene, "cavity", None) is not None
                              else "no cabin field in this setup (the body has no closed cabin)"))
    return out


# ----- draws: input values for many evaluations at once ----------------------------------------
@dataclass
class Draws:
    """Input values of D evaluations (SI units, dB): one array (D,) per input key; materials as (D, M)
    in the order of ``materials``."""

    materials: tuple[str, ...]
    mat_db: np.ndarray
    tread_db: np.ndarray
    sidewall_db: np.ndarray
    null_floor_db: np.ndarray
    road: np.ndarray  # int, -1 = reflection off
    tilt_rad: np.ndarray
    tilt_azimuth_rad: np.ndarray
    eirp_dbm: np.ndarray
    freq_hz: np.ndarray
    cabin_m2: np.ndarray

    @property
    def n(self) -> int:
        return len(self.eirp_dbm)

    def take(self, sl) -> Draws:
        return Draws(self.materials, self.mat_db[sl], *(getattr(self, k)[sl] for k in _FIELDS))

    def set(self, inp: UncertainInput, values) -> None:
        """Set input ``inp`` to ``values`` (scalar or (D,)) in every draw."""
        if inp.kind == "material":
            self.mat_db[:, self.materials.index(inp.name)] = values
        elif inp.kind == "axis_tilt":
            self.tilt_rad[:] = values
        else:
            getattr(self, _KIND_FIELD[inp.kind])[:] = values


_FIELDS = ("tread_db", "sidewall_db", "null_floor_db", "road", "tilt_rad", "tilt_azimuth_rad", "eirp_dbm", "freq_hz",
           "cabin_m2")
_KIND_FIELD = {"tire_tread": "tread_db", "tire_sidewall": "sidewall_db", "null_floor": "null_floor_db", "road": "road",
               "eirp": "eirp_dbm", "frequency": "freq_hz", "cabin_absorption": "cabin_m2"}


def nominal_draws(inputs: list[UncertainInput], n: int) -> Draws:
    """n evaluations with every input at its nominal value."""
    mats = tuple(i.name for i in inputs if i.kind == "material")
    nom = {i.kind if i.kind != "material" else i.key: i.nominal for i in inputs}
    return Draws(
        materials=mats,
        mat_db=np.tile([nom[f"material:{m}"] for m in mats], (n, 1)).astype(float).reshape(n, len(mats)),
        tread_db=np.full(n, nom["tire_tread"]), sidewall_db=np.full(n, nom["tire_sidewall"]),
        null_floor_db=np.full(n, nom["null_floor"]), road=np.full(n, int(nom["road"]), int),
        tilt_rad=np.zeros(n), tilt_azimuth_rad=np.zeros(n), eirp_dbm=np.full(n, nom["eirp"]),
        freq_hz=np.full(n, nom["frequency"]), cabin_m2=np.full(n, nom.get("cabin_absorption", 0.0)))


def random_draws(inputs: list[UncertainInput], n: int = DEFAULT_DRAWS, seed: int = DEFAULT_SEED) -> Draws:
    """n Monte-Carlo draws (fixed seed): ranged inputs triangular (low, nominal, high), the road outcome uniform over
    its options, the tilt 0-15 deg triangular with mode 0 in a uniform direction. Inputs are drawn in a fixed order,
    also those without effect, so a seed gives the same numbers whatever the setup."""
    rng = np.random.default_rng(seed)
    d = nominal_draws(inputs, n)
    for inp in inputs:
        if inp.kind == "road":
            opts = np.asarray(inp.options, int)
            d.set(inp, opts[rng.integers(0, len(opts), n)])
        elif inp.kind == "axis_tilt":
            d.tilt_rad[:] = rng.triangular(0.0, 0.0, inp.high, n) if inp.high > 0 else 0.0
            d.tilt_azimuth_rad[:] = rng.uniform(0.0, 2.0 * np.pi, n)
        elif inp.high > inp.low:
            mode = min(max(inp.nominal, inp.low), inp.high)
            d.set(inp, rng.triangular(inp.low, mode, inp.high, n))
        else:
            rng.random(n)  # keep the stream in step
    return d


def tilted_axes(axes: np.ndarray, tilt_rad, azimuth_rad) -> np.ndarray:
    """Unit axes (S, 3) tilted by ``tilt_rad`` toward ``azimuth_rad`` (D,) about each axis: (D, S, 3).

    The azimuth is measured in the plane normal to the axis from e1 = the unit vector of (z x axis)
    (or of (x x axis) for a vertical axis), toward e2 = axis x e1."""
    a = np.atleast_2d(np.asarray(axes, float))
    a = a / np.linalg.norm(a, axis=1, keepdims=True)
    ref = np.where(np.abs(a[:, 2:3]) > 0.9, np.array([[1.0, 0.0, 0.0]]), np.array([[0.0, 0.0, 1.0]]))
    e1 = np.cross(ref, a)
    e1 /= np.linalg.norm(e1, axis=1, keepdims=True)
    e2 = np.cross(a, e1)
    t = np.atleast_1d(np.asarray(tilt_rad, float))[:, None, None]
    az = np.atleast_1d(np.asarray(azimuth_rad, float))[:, None, None]
    return np.cos(t) * a[None] + np.sin(t) * (np.cos(az) * e1[None] + np.sin(az) * e2[None])


# ----- the fast model ------------------------------------------------------------------------
class _Links:
    """A set of links (spot, wheel, wheel angle) traced once with the engine's own code (core.links.link_rays with
    ``detail=True``) and prepared for evaluation at many input values (single precision, (links, draws) arrays)."""

    def __init__(self, scene, mats: tuple[str, ...], positions, axes, spot_bits, spot, wheel, theta, cabin=None):
        self.scene, self.mats = scene, mats
        self.spot = spot
        self.N = len(theta)
        self.cabin = cabin.at_links(wheel, theta) if cabin is not None else []
        src, s_axis, bits0 = sensor_states(scene, wheel, theta)
        sb = None if spot_bits is None else spot_bits[spot]
        rays = link_rays(scene, wheel, theta, src, s_axis, bits0, positions[spot], axes[spot], sb, detail=True)
        # the cabin's diffuse power at nominal (the same for every draw), (N, 1) 1/m^2, and the fade probability
        cav = with_cavity(scene, rays.field(), wheel, theta, positions[spot], axes[spot])
        self.diffuse = np.broadcast_to(np.asarray(cav.diffuse, float), (self.N,)).astype(_F)[:, None]
        self.fade_q = float(cav.fade_q)
        dd = rays.direct_detail
        self.dipole_rx = scene.receiver_pattern == "dipole"
        self.iso_s = scene.sensor_kind == "isotropic"
        e_d = dd.e
        self.e_re, self.e_im = e_d.real.astype(_F), e_d.imag.astype(_F)
        self.u_d = dd.u.astype(_F)
        self.cd_fixed = np.linalg.norm(e_d, axis=-1).astype(_F)  # isotropic receiver: |e_d|
        self.d_d = rays.direct.d.astype(_F)
        self.cnt_d, self.pas_d = self._body_tables([dd.body[0]])
        self.rim_d = self._rim(dd.wheel)
        fp = [self.cnt_d, np.asarray(self.pas_d[0].sum(axis=1))]
        for w in (dd.wheel, rays.road_detail.wheel if rays.road is not None else None):
            if w is not None:
                fp += [w.through_tread[:, None], w.rim_shadowed[:, None], np.isfinite(w.rim_v)[:, None]]
        self.road = rays.road is not None
        if self.road:
            rd = rays.road_detail
            self.d_r, self.phase0 = rays.road.d.astype(_F), rays.phase.astype(_F)
            self.cnt_r, self.pas_r = self._body_tables(list(rd.body))
            self.rim_r = self._rim(rd.wheel)
            fp += [self.cnt_r, np.asarray(self.pas_r[0].sum(axis=1))]
            t_i = rd.t_tm * _MIRROR
            self.n_te, self.t_tm, self.t_i, self.u_i = (x.astype(_F) for x in (rd.n_te, rd.t_tm, t_i, rd.u))
            gammas = [fresnel_reflection(road_permittivity(name, scene.freq_hz), rd.grazing) for name in ROAD_NAMES]
            ga = np.array([g[0] for g in gammas])  # (R, N) TE
            gb = np.array([g[1] for g in gammas])  # (R, N) TM
            c = np.complex64
            self.gte, self.gtm = ga.T.astype(c), gb.T.astype(c)
            self.A = (ga * rd.e_te[None]).T.astype(c)  # coefficient of (n_te . r), dipole receiver
            self.B = (gb * rd.e_tm[None]).T.astype(c)  # coefficient of -(t_tm . r)
            ref = np.conj(e_d / np.maximum(np.linalg.norm(e_d, axis=-1), 1e-12)[:, None])
            self.cr_fixed = (ga * rd.e_te[None] * _dot(rd.n_te, ref)[None]
                             - gb * rd.e_tm[None] * _dot(rd.t_tm, ref)[None]).T.astype(c)  # isotropic receiver
        self.fingerprint = np.concatenate([np.asarray(p, float) for p in fp], axis=1)

    def diffuse_for(self, d: Draws, axis_ratio: np.ndarray | None = None) -> np.ndarray:
        """The cabin's diffuse power of the links for the draws, (N, D) or (N, 1), 1/m^2 (:class:`_CabinResponse`);
        ``axis_ratio`` (S, D): the spots' diffuse factor with the drawn receiver axes over the nominal one."""
        scale = 1.0 if axis_ratio is None else axis_ratio[self.spot].astype(_F)
        if not self.cabin:
            return self.diffuse * scale
        delta = np.zeros((self.N, d.n), _F)
        for inp, nominal, ends in self.cabin:
            x = d.mat_db[:, d.materials.index(inp.name)] if inp.kind == "material" else \
                np.asarray(getattr(d, _KIND_FIELD[inp.kind]), float)
            for value, r_db in ends:
                if inp.kind == "road":
                    w = (x == value).astype(_F)
                else:  # piecewise linear between nominal and this end
                    w = np.clip((x - nominal) / (value - nominal), 0.0, 1.0).astype(_F)
                delta += r_db[:, None] * w[None, :]
        return self.diffuse * 10.0 ** (delta / 10.0) * scale

    def _body_tables(self, legs):
        """Per-material crossing counts (N, M) outside passages, and passages (rows, material a, material b, v)."""
        cnt = np.zeros((self.N, len(self.mats)), _F)
        prow, pa, pb, pv = [], [], [], []
        for body in legs:
            mat = _material_index(self.scene.hull, body.kind, body.zone, self.mats)
            if np.any((mat < 0) & (body.loss_db != 0.0)):
                raise ValueError("a crossing of a material that is not an input")
            free = ~body.in_passage & (mat >= 0)
            np.add.at(cnt, (body.rows[free], mat[free]), 1.0)
            prow.append(body.p_rows)
            pa.append(mat[body.p_first])
            pb.append(mat[body.p_first + 1])
            pv.append(body.p_v)
        rows, v = np.concatenate(prow), np.concatenate(pv)
        add = sparse.csr_matrix((np.ones(len(rows), _F), (rows, np.arange(len(rows)))), shape=(self.N, len(rows)))
        return cnt, (add, np.concatenate(pa), np.concatenate(pb), *_knife_edge_terms(v))

    @staticmethod
    def _rim(w):
        if w is None:
            return None
        m = np.isfinite(w.rim_v)
        return (m, *_knife_edge_terms(w.rim_v[m]), w.through_tread)

    def _loss(self, d: Draws, cnt, pas, rim, root_fs) -> np.ndarray:
        """Wheel + body loss of one ray per (link, draw), dB: (N, D)."""
        mat = d.mat_db.astype(_F)
        loss = cnt @ mat.T
        add, ma, mb, j0, dj = pas
        if len(ma):
            pen = np.where(ma[:, None] >= 0, mat.T[np.maximum(ma, 0)], 0.0) + \
                np.where(mb[:, None] >= 0, mat.T[np.maximum(mb, 0)], 0.0)
            loss += add @ np.minimum(pen, j0[:, None] + dj[:, None] * (root_fs - 1.0)[None, :])
        if rim is not None:
            m, j0, dj, tread = rim
            loss[m] += j0[:, None] + dj[:, None] * (root_fs - 1.0)[None, :]
            loss += np.where(tread[:, None], d.tread_db.astype(_F)[None, :], d.sidewall_db.astype(_F)[None, :])
        return loss

    def _proj(self, vec: np.ndarray, r: np.ndarray) -> np.ndarray:
        """vec (N, 3) . the receiver axis of each link's spot in every draw (r: (D, S, 3)): (N, D)."""
        return np.einsum("nk,nkd->nd", vec, self._r_links(r))

    def _r_links(self, r):
        if self._r_cache is None or self._r_cache[0] is not r:
            self._r_cache = (r, np.ascontiguousarray(r[:, self.spot].transpose(1, 2, 0)))
        return self._r_cache[1]

    _r_cache = None

    def fields(self, d: Draws, r: np.ndarray):
        """Field (real and imaginary parts) and floor power (N, D), 1/m and 1/m^2, and the level constant (D,) dBm,
        with the receiver axes ``r`` (D, S, 3): both rays recombined per draw in real arithmetic (as
        core.links.LinkRays.field)."""
        sc = self.scene
        self._r_cache = None
        fs = (d.freq_hz / sc.freq_hz).astype(_F)
        root_fs = np.sqrt(fs)
        if self.dipole_rx and self.iso_s:  # the isotropic sensor's field follows the receiver axis
            ur = self._proj(self.u_d, r)
            cd_re, cd_im = np.sqrt(np.maximum(1.0 - ur * ur, 0.0)), 0.0
        elif self.dipole_rx:
            cd_re, cd_im = self._proj(self.e_re, r), self._proj(self.e_im, r)
        else:
            cd_re, cd_im = self.cd_fixed[:, None], 0.0
        loss_d = self._loss(d, self.cnt_d, self.pas_d, self.rim_d, root_fs)
        g_d = np.exp(loss_d * _NEG_LN10_20) / self.d_d[:, None]
        f_re = cd_re * g_d
        f_im = cd_im * g_d
        floor2 = g_d * g_d
        on = d.road >= 0
        if self.road and on.any():
            k = np.maximum(d.road, 0)
            if self.dipole_rx and self.iso_s:
                ui = self._proj(self.u_i, r)
                nr, ti, tr = self._proj(self.n_te, r), self._proj(self.t_i, r), self._proj(self.t_tm, r)
                inv = 1.0 / np.maximum(np.sqrt(np.maximum(1.0 - ui * ui, 0.0)), 1e-12)
                c_r = (self.gte[:, k] * (nr * nr) - self.gtm[:, k] * (ti * tr)) * inv
            elif self.dipole_rx:
                c_r = self.A[:, k] * self._proj(self.n_te, r) - self.B[:, k] * self._proj(self.t_tm, r)
            else:
                c_r = self.cr_fixed[:, k]
            loss_r = self._loss(d, self.cnt_r, self.pas_r, self.rim_r, root_fs)
            g_r = np.exp(loss_r * _NEG_LN10_20) / self.d_r[:, None]
            g_r *= on[None, :]
            phase = self.phase0[:, None] * fs[None, :]
            b_re, b_im = c_r.real * g_r, c_r.imag * g_r
            cos, sin = np.cos(phase), np.sin(phase)
            f_re = f_re + (b_re * cos + b_im * sin)  # b e^{-j phase}
            f_im = f_im + (b_im * cos - b_re * sin)
            floor2 = floor2 + g_r * g_r
        floor2 *= (10.0 ** (d.null_floor_db / 10.0)).astype(_F)[None, :]
        const = d.eirp_dbm + sc.receiver_gain_dbi + 20.0 * np.log10(sc.wavelength_m / (4.0 * np.pi) / fs)
        return f_re, f_im, floor2, const.astype(_F)


class _CabinResponse:
    """How the cabin's diffuse power (core.cavity) changes with the inputs: the cavity rebuilt with each input that
    can change it (panel materials, tire losses, the road outcome, the contents' absorption) at each end of its range
    (each road outcome), kept as its change in dB over the wheels and the cavity's tabulated wheel angles."""

    KINDS = ("material", "tire_tread", "tire_sidewall", "road", "cabin_absorption")

    def __init__(self, scene, inputs: list[UncertainInput]):
        from core.scoring import Scene

        self.cavity = cav = getattr(scene, "cavity", None)
        self.terms: list[tuple[UncertainInput, float, list[tuple[float, np.ndarray]]]] = []
        if cav is None:
            return

        def per_watt_db(c):
            return 10.0 * np.log10(np.maximum(c.input, 1e-300)) - 10.0 * np.log10(c.sigma_total_m2)

        nominal = per_watt_db(cav)
        for inp in inputs:
            if inp.effect or inp.kind not in self.KINDS:
                continue
            values = inp.options if inp.kind == "road" else (inp.low, inp.high)
            ends = []
            for value in values:
                if float(value) == float(inp.nominal):
                    continue
                other = Scene.from_vehicle(vehicle_with(scene.vehicle, inp, float(value))).cavity
                if other is not None:
                    ends.append((float(value), per_watt_db(other) - nominal))
            if any(np.max(np.abs(t)) > 1e-9 for _, t in ends):
                self.terms.append((inp, float(inp.nominal), ends))

    def at_links(self, wheel, theta) -> list[tuple[UncertainInput, float, list[tuple[float, np.ndarray]]]]:
        """The terms with each end's change (dB) at the links (wheel, theta) (N,), interpolated over the turn as
        core.cavity.Cavity.input_at interpolates the diffuse power."""
        from dataclasses import replace

        out = []
        for inp, nominal, ends in self.terms:
            at = [(value, (10.0 * np.log10(replace(self.cavity, input=10.0 ** (t / 10.0)).input_at(wheel, theta)))
                   .astype(_F)) for value, t in ends]
            out.append((inp, nominal, at))
        return out


def _knife_edge_terms(v: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """J(v) and v dJ/dv (ITU-R P.526 eq. 31), dB, so that J(v sqrt(f / f0)) = J + v J' (sqrt(f / f0) - 1) to first
    order: v grows with sqrt(f), and the frequency moves by at most 0.2 % (v by 0.1 %)."""
    return knife_edge_loss_db(v).astype(_F), (v * knife_edge_loss_slope_db(v)).astype(_F)


def _chord_min(f_re, f_im, floor2, axis: int, smooth: np.ndarray, cyclic: bool) -> np.ndarray:
    """Smallest floored power on the chords between neighbouring samples along ``axis`` whose interval is smooth
    (``smooth``: True per interval, broadcast against the arrays without their last (draw) axis), in closed form
    (the prediction step of core.turn_minimum); inf where no interval is smooth."""
    if cyclic:
        nxt = [np.roll(x, -1, axis=axis) for x in (f_re, f_im, floor2)]
        r0, i0, l0 = f_re, f_im, floor2
    else:
        sl0 = [slice(None)] * f_re.ndim
        sl1 = list(sl0)
        sl0[axis], sl1[axis] = slice(0, -1), slice(1, None)
        r0, i0, l0 = (x[tuple(sl0)] for x in (f_re, f_im, floor2))
        nxt = [x[tuple(sl1)] for x in (f_re, f_im, floor2)]
    r1, i1, l1 = nxt
    dr, di = r1 - r0, i1 - i0
    t = np.clip(-(r0 * dr + i0 * di) / np.maximum(dr * dr + di * di, _F(1e-37)), 0.0, 1.0)
    mr, mi = r0 + t * dr, i0 + t * di
    pred = np.maximum(mr * mr + mi * mi, l0 + t * (l1 - l0))
    return np.where(smooth[..., None], pred, np.inf).min(axis=axis)


class PerturbationModel:
    """Margins of S spots for many input values at once, from geometry traced once (see the module notes).

    Links: every spot and wheel at ``n_angles`` equally spaced wheel angles plus the engine's worst angle
    (``worst_angle_rad`` (S, W)); in each interval between neighbouring angles whose rays cross other panels (or
    passages, tire parts) at its ends, the jump is located by bisection and sampled up to it from either side.
    The worst case of a draw is the smallest of the sampled levels and of the chord minima on the smooth
    intervals (the same panels at both ends)."""

    def __init__(self, scene, inputs: list[UncertainInput], positions, axes, worst_angle_rad=None,
                 n_angles: int = DENSE_ANGLES):
        self.scene = scene
        self.inputs = inputs
        pos = self.positions = np.atleast_2d(np.asarray(positions, float))
        ax = np.atleast_2d(np.asarray(axes, float))
        self.axes = ax / np.linalg.norm(ax, axis=1, keepdims=True)
        S, W = len(pos), len(scene.wheels)
        self.materials = mats = tuple(i.name for i in inputs if i.kind == "material")
        sb = start_bits(scene.hull, pos[:, 0], pos[:, 1], pos[:, 2]) if scene.ground_reflection else None
        step = 2.0 * np.pi / n_angles
        th = np.broadcast_to(np.arange(n_angles) * step, (S, W, n_angles))
        if worst_angle_rad is not None:
            th = np.concatenate([th, np.asarray(worst_angle_rad, float).reshape(S, W, 1)], axis=2)
        self.shape = th.shape  # (S, W, K)
        self.n_dense = n_angles
        spot = np.broadcast_to(np.arange(S)[:, None, None], th.shape).reshape(-1)
        wheel = np.broadcast_to(np.arange(W)[None, :, None], th.shape).reshape(-1)
        self.cabin = _CabinResponse(scene, inputs)
        self.dense = _Links(scene, mats, pos, self.axes, sb, spot, wheel, th.reshape(-1), self.cabin)
        fp = self.dense.fingerprint.reshape(th.shape + (-1,))[:, :, :n_angles]
        self.smooth = np.all(fp == np.roll(fp, -1, axis=2), axis=-1)  # (S, W, n_angles)
        # each interval with a jump: the jump located by bisection, then samples up to it from either side
        s_i, w_i, k_i = np.nonzero(~self.smooth)
        self.extra = None
        if len(s_i):
            fa = fp[s_i, w_i, k_i]
            lo, hi = k_i * step, (k_i + 1) * step
            for _ in range(JUMP_BISECTIONS):
                mid = 0.5 * (lo + hi)
                fm = _Links(scene, mats, pos, self.axes, sb, s_i, w_i, mid).fingerprint
                same = np.all(fm == fa, axis=1)
                lo, hi = np.where(same, mid, lo), np.where(same, hi, mid)
            frac = np.linspace(0.0, 1.0, JUMP_SIDE_SAMPLES)
            left = k_i[:, None] * step + frac[None, :] * (lo - k_i * step)[:, None]
            right = hi[:, None] + frac[None, :] * ((k_i + 1) * step - hi)[:, None]
            t_e = np.concatenate([left, right], axis=1)
            n = t_e.shape[1]
            self.extra_pair = s_i * W + w_i
            self.extra_shape = (len(s_i), n)
            self.extra = _Links(scene, mats, pos, self.axes, sb, np.repeat(s_i, n), np.repeat(w_i, n), t_e.reshape(-1),
                                self.cabin)
            fpe = self.extra.fingerprint.reshape(len(s_i), n, -1)
            self.extra_smooth = np.all(fpe[:, 1:] == fpe[:, :-1], axis=-1)  # (Q, n - 1)

    @property
    def links(self) -> int:
        """Links traced: the dense set and the subdivided jumps."""
        return self.dense.N + (0 if self.extra is None else self.extra.N)

    def _axes(self, d: Draws) -> np.ndarray:
        return tilted_axes(self.axes, d.tilt_rad, d.tilt_azimuth_rad).astype(_F)

    def _axis_ratio(self, d: Draws, r: np.ndarray) -> np.ndarray | None:
        """(S, D): the diffuse factor of each spot with the drawn axes ``r`` (D, S, 3) over the nominal axis's (a
        dipole receiver near a wall hears the diffuse field by its orientation, core.cavity.wall_factor); None when
        nothing is tilted or there is no cabin field."""
        sc = self.scene
        if getattr(sc, "cavity", None) is None or sc.receiver_pattern != "dipole" or not np.any(d.tilt_rad):
            return None
        from core.cavity import spot_factor

        S = len(self.axes)
        nominal = spot_factor(sc, self.positions, self.axes)
        drawn = spot_factor(sc, np.tile(self.positions, (d.n, 1)), np.asarray(r, float).reshape(-1, 3)).reshape(d.n, S)
        return np.where(nominal > 0.0, drawn / np.where(nominal > 0.0, nominal, 1.0), 1.0).T

    def link_levels(self, d: Draws) -> np.ndarray:
        """Received level of the dense links for the draws, dBm: (D, S, W, K)."""
        out = np.empty((self.dense.N, d.n), _F)
        step = max(1, _BLOCK // max(1, self.dense.N))
        for a in range(0, d.n, step):
            part = d.take(slice(a, a + step))
            r = self._axes(part)
            f_re, f_im, floor2, const = self.dense.fields(part, r)
            p = fade_power(np.maximum(f_re * f_re + f_im * f_im, floor2),
                           self.dense.diffuse_for(part, self._axis_ratio(part, r)), self.dense.fade_q)
            out[:, a:a + step] = const[None, :] + 10.0 * np.log10(np.maximum(p, _F(1e-37)))
        return out.T.reshape((d.n,) + self.shape)

    def _worst_power(self, d: Draws) -> tuple[np.ndarray, np.ndarray]:
        """Smallest scored power over the turn per (spot, wheel, draw) (floored rays, cabin field and fade), 1/m^2,
        and the level constant (D,)."""
        r = self._axes(d)
        S, W, K = self.shape
        D = d.n
        f_re, f_im, floor2, const = self.dense.fields(d, r)
        f_re, f_im, floor2 = (x.reshape(S, W, K, D) for x in (f_re, f_im, floor2))
        q = self.dense.fade_q
        coh = np.maximum(f_re * f_re + f_im * f_im, floor2)
        ratio = self._axis_ratio(d, r)
        dif = np.broadcast_to(self.dense.diffuse_for(d, ratio).reshape(S, W, K, -1), coh.shape)
        best = fade_power(coh, dif, q).min(axis=2)
        nd = self.n_dense
        # between the samples: the chord minimum of the rays with the diffuse power at the rays' lowest sample (the
        # diffuse power changes slowly over the turn; core.links.fade_power rises with the rays' power)
        dif_at = np.take_along_axis(dif[:, :, :nd], coh[:, :, :nd].argmin(axis=2)[:, :, None], axis=2)[:, :, 0]
        chord = _chord_min(f_re[:, :, :nd], f_im[:, :, :nd], floor2[:, :, :nd], 2, self.smooth, True)
        best = np.minimum(best, fade_power(chord, dif_at, q)).reshape(S * W, D)
        if self.extra is not None:
            Q, M = self.extra_shape
            e_re, e_im, e_fl, _ = self.extra.fields(d, r)
            e_re, e_im, e_fl = (x.reshape(Q, M, D) for x in (e_re, e_im, e_fl))
            e_coh = np.maximum(e_re * e_re + e_im * e_im, e_fl)
            e_dif = np.broadcast_to(self.extra.diffuse_for(d, ratio).reshape(Q, M, -1), e_coh.shape)
            e_best = fade_power(e_coh, e_dif, q).min(axis=1)
            e_at = np.take_along_axis(e_dif, e_coh.argmin(axis=1)[:, None], axis=1)[:, 0]
            e_best = np.minimum(e_best, fade_power(_chord_min(e_re, e_im, e_fl, 1, self.extra_smooth, False), e_at, q))
            np.minimum.at(best, self.extra_pair, e_best)
        return best.reshape(S, W, D), const

    def margins(self, d: Draws) -> np.ndarray:
        """Spot margins for the draws, dB: (D, S) (worst wheel, worst case over the turn (:meth:`_worst_power`); when
        the scene scores by a percentile, that percentile of the levels at the engine's sampled angles)."""
        sc = self.scene
        S = self.shape[0]
        out = np.empty((d.n, S))
        step = max(1, _BLOCK // max(1, self.links))
        for a in range(0, d.n, step):
            part = d.take(slice(a, a + step))
            if sc.worst_percentile > 0:  # the engine's statistic over its own sampled angles (when they are dense ones)
                lv = self.link_levels(part)  # (Db, S, W, K)
                A = len(sc.angles_rad)
                pick = slice(0, self.n_dense, self.n_dense // A) if self.n_dense % A == 0 else slice(0, self.n_dense)
                worst = np.percentile(lv[..., pick], sc.worst_percentile, axis=-1).min(axis=-1)
                out[a:a + step] = worst
            else:
                p, const = self._worst_power(part)
                worst = const[None, None, :] + 10.0 * np.log10(np.maximum(p, _F(1e-37)))
                out[a:a + step] = worst.min(axis=1).T
        return out - sc.sensitivity_dbm - sc.required_margin_db


def _dot(a, b):
    return np.einsum("...i,...i->...", a, b)


def _material_index(hull, kind: np.ndarray, zone: np.ndarray, mats: tuple[str, ...]) -> np.ndarray:
    """Index into ``mats`` of each crossing's material (Hull.crossing_material), -1 when not an input."""
    out = np.full(len(kind), -1, int)
    for k, z in {(int(k), int(z)) for k, z in zip(kind.tolist(), zone.tolist())} if len(kind) < 64 else \
            set(zip(*np.unique(np.stack([kind.astype(int), zone.astype(int)]), axis=1).tolist())):
        m = hull.crossing_material(k, z)
        if m in mats:
            out[(kind == k) & (zone == z)] = mats.index(m)
    return out


# ----- tornado and P(pass) -----------------------------------------------------------------------
@dataclass(frozen=True)
class TornadoBar:
    """The margin with one input at each end of its range (the others nominal), dB, anchored at the engine's
    margin; ``low_text`` / ``high_text`` name the input values that gave them."""

    key: str
    label: str
    nominal_text: str
    low_text: str
    high_text: str
    margin_low_db: float
    margin_high_db: float
    source: str
    effect: str = ""

    @property
    def swing_db(self) -> float:
        return abs(self.margin_high_db - self.margin_low_db)

    def worst_db(self) -> float:
        return min(self.margin_low_db, self.margin_high_db)

    def to_dict(self) -> dict:
        return {"input": self.key, "label": self.label, "nominal": self.nominal_text, "low": self.low_text,
                "high": self.high_text, "margin_at_low_db": round(self.margin_low_db, 3),
                "margin_at_high_db": round(self.margin_high_db, 3), "swing_db": round(self.swing_db, 3),
                "source": self.source, "effect": self.effect or None}


@dataclass(frozen=True)
class SpotSensitivity:
    """Tornado and Monte-Carlo pass probability of one spot (margins in dB)."""

    spot: str
    margin_db: float  # the engine's margin (the ranking's)
    bars: tuple[TornadoBar, ...]  # most influential first
    p_pass: float
    draws: int
    seed: int
    margin_p05_db: float
    margin_p50_db: float
    margin_worst_corner_db: float  # every input at the end that lowers the margin (one at a time)
    margin_best_corner_db: float
    fast_check_db: float  # fast model at nominal - engine margin (the anchoring removes it)
    not_varied: tuple = NOT_VARIED
    mc_margins_db: np.ndarray = field(default=None, repr=False)

    def most_sensitive(self, n: int = 2) -> list[TornadoBar]:
        return [b for b in self.bars if b.swing_db > 0][:n]

    def to_dict(self) -> dict:
        return {"spot": self.spot, "margin_db": round(self.margin_db, 3), "p_pass": round(self.p_pass, 4),
                "draws": self.draws, "seed": self.seed, "margin_p05_db": round(self.margin_p05_db, 3),
                "margin_median_db": round(self.margin_p50_db, 3),
                "fast_model_nominal_offset_db": round(self.fast_check_db, 3),
                "tornado": [b.to_dict() for b in self.bars],
                "not_varied": [{"input": a, "why": b} for a, b in self.not_varied]}


@dataclass(frozen=True)
class Sensitivity:
    """The analysis of several spots: the inputs and, per spot, its tornado and P(pass)."""

    inputs: tuple[UncertainInput, ...]
    spots: tuple[SpotSensitivity, ...]
    method: str

    def inputs_dict(self) -> list[dict]:
        return [{"input": i.key, "label": i.label, "nominal": i.text(i.nominal),
                 "range": [i.text(i.low), i.text(i.high)] if i.kind not in ("road",) else
                 [road_outcome_name(o) for o in i.options],
                 "distribution": i.distribution, "source": i.source, "effect": i.effect or None} for i in self.inputs]


METHOD = (f"one at a time between the ends of each input's range (tornado); Monte-Carlo P(pass) over "
          f"{DEFAULT_DRAWS} draws, seed {DEFAULT_SEED}, triangular distributions with the mode at nominal; geometry "
          f"traced once over {DENSE_ANGLES} wheel angles per turn plus the engine's worst angles, both rays "
          "recombined per draw; margins anchored at the engine's (core.sensitivity)")


def _tornado_cases(inputs: list[UncertainInput]) -> list[tuple[UncertainInput, list[tuple[str, dict]]]]:
    """Per input, the evaluations it needs: (value text, {field: value})."""
    cases = []
    for inp in inputs:
        if inp.effect:  # no effect in this setup: its bar is 0 without evaluating anything
            cases.append((inp, []))
        elif inp.kind == "road":
            opts = [o for o in inp.options if o != int(inp.nominal)]
            cases.append((inp, [(road_outcome_name(o), {"value": o}) for o in opts]))
        elif inp.kind == "axis_tilt":
            azs = np.arange(TILT_DIRECTIONS) * (2 * np.pi / TILT_DIRECTIONS)
            cases.append((inp, [(f"{np.degrees(inp.high):.0f} deg, azimuth {np.degrees(a):.0f} deg",
                                 {"value": inp.high, "azimuth": a}) for a in azs] if inp.high > 0 else []))
        else:
            cases.append((inp, [(inp.text(inp.low), {"value": inp.low}), (inp.text(inp.high), {"value": inp.high})]))
    return cases


#: links of the fast model held at once (spots x wheels x (DENSE_ANGLES + 1), plus the jumps' samples): bounds
#: the memory of the analysis of many spots (about 1.4 kB per link; 500 spots of 4 wheels held 1.1 GB at once)
MODEL_LINKS = 64 * 4 * (DENSE_ANGLES + 1)


def _block_margins(scene, inputs, positions, axes, worst_angle_rad, d: Draws, mc: Draws) -> tuple[np.ndarray, np.ndarray]:
    """The fast model's margins of the tornado cases ``d`` and the draws ``mc`` for S spots, (len(d), S) and
    (len(mc), S), built for blocks of spots so that at most about MODEL_LINKS links are held at once (a spot's
    margins do not depend on the other spots of its block; the draws are the same for every block)."""
    positions = np.atleast_2d(np.asarray(positions, float))
    axes = np.atleast_2d(np.asarray(axes, float))
    S, W = len(positions), max(1, len(scene.wheels))
    block = max(1, MODEL_LINKS // (W * (DENSE_ANGLES + 1)))
    parts_d, parts_mc = [], []
    for a in range(0, S, block):
        sl = slice(a, min(S, a + block))
        worst = None if worst_angle_rad is None else np.asarray(worst_angle_rad, float)[sl]
        model = PerturbationModel(scene, inputs, positions[sl], axes[sl], worst)
        parts_d.append(model.margins(d))
        parts_mc.append(model.margins(mc))
    return np.concatenate(parts_d, axis=1), np.concatenate(parts_mc, axis=1)


def analyse(scene, positions, axes, names, engine_margin_db, worst_angle_rad=None, n_draws: int = DEFAULT_DRAWS,
            seed: int = DEFAULT_SEED, inputs: list[UncertainInput] | None = None) -> Sensitivity:
    """Tornado and P(pass) of S spots (positions, axes (S, 3); the engine's margins (S,) dB and worst angles (S, W))."""
    if n_draws < 1:
        raise ValueError("n_draws must be at least 1")
    inputs = list(inputs) if inputs is not None else uncertain_inputs(scene.vehicle, scene)
    cases = _tornado_cases(inputs)
    n_cases = sum(len(c) for _, c in cases)
    d = nominal_draws(inputs, 1 + n_cases)
    k = 1
    spans = []
    for inp, cs in cases:
        for _text, val in cs:
            one = d.take(slice(k, k + 1))  # views into d
            one.set(inp, val["value"])
            if "azimuth" in val:
                one.tilt_azimuth_rad[:] = val["azimuth"]
            k += 1
        spans.append((inp, cs, k - len(cs), k))
    mc = random_draws(inputs, n_draws, seed)
    m, m_mc = _block_margins(scene, inputs, positions, axes, worst_angle_rad, d, mc)  # (1 + cases, S), (draws, S)
    nominal = m[0]
    engine = np.asarray(engine_margin_db, float)
    shift = engine - nominal  # anchoring
    m_mc = m_mc + shift[None, :]
    out = []
    for s in range(len(engine)):
        bars = []
        worst_corner = best_corner = 0.0
        for inp, cs, a, b in spans:
            vals = m[a:b, s] + shift[s]
            texts = [t for t, _ in cs]
            if len(vals) == 0:  # no effect in this setup
                lo_t, hi_t = inp.text(inp.low), inp.text(inp.high)
                lo = hi = engine[s]
            elif inp.kind in ("road", "axis_tilt"):
                i_lo, i_hi = int(np.argmin(vals)), int(np.argmax(vals))
                lo_t, hi_t, lo, hi = texts[i_lo], texts[i_hi], float(vals[i_lo]), float(vals[i_hi])
                lo, hi = min(lo, engine[s]), max(hi, engine[s])
                if lo == engine[s]:
                    lo_t = inp.text(inp.nominal) + " (nominal)"
                if hi == engine[s]:
                    hi_t = inp.text(inp.nominal) + " (nominal)"
            else:
                lo_t, hi_t, lo, hi = texts[0], texts[1], float(vals[0]), float(vals[1])
            bars.append(TornadoBar(inp.key, inp.label, inp.text(inp.nominal), lo_t, hi_t, lo, hi, inp.source,
                                   inp.effect))
            worst_corner += min(lo, hi) - engine[s]
            best_corner += max(lo, hi) - engine[s]
        bars.sort(key=lambda b_: (-b_.swing_db, b_.worst_db()))
        ms = m_mc[:, s]
        out.append(SpotSensitivity(
            spot=names[s], margin_db=float(engine[s]), bars=tuple(bars), p_pass=float(np.mean(ms >= 0.0)),
            draws=n_draws, seed=seed, margin_p05_db=float(np.percentile(ms, 5)), margin_p50_db=float(np.median(ms)),
            margin_worst_corner_db=float(engine[s] + worst_corner), margin_best_corner_db=float(engine[s] + best_corner),
            fast_check_db=float(nominal[s] - engine[s]), mc_margins_db=ms))
    return Sensitivity(tuple(inputs), tuple(out), METHOD)


def analyse_scores(scene, scores, axes, spots=None, n_draws: int = DEFAULT_DRAWS, seed: int = DEFAULT_SEED) -> Sensitivity:
    """:func:`analyse` for scored spots (core.scoring.SpotScores and the axes they were scored with)."""
    idx = np.arange(len(scores.names)) if spots is None else np.asarray(spots, int)
    axes = np.atleast_2d(np.asarray(axes, float))
    return analyse(scene, scores.positions[idx], axes[idx], [scores.names[i] for i in idx], scores.margin_db[idx],
                   np.radians(scores.worst_angle_deg[idx]), n_draws, seed)


# ----- full recomputation (the check of the fast model) ---------------------------------------------
def vehicle_with(v, inp: UncertainInput, value: float):
    """The vehicle with one input set to ``value`` (in the file's own fields), for a full recomputation.
    (The receiver tilt is not a file field: use :func:`tilted_axes` on the spot axes.)"""
    from core.vehicle import UserMaterial, check_vehicle

    r = v.radio
    if inp.kind in ("material", "tire_tread", "tire_sidewall"):
        name = inp.name or inp.kind
        mats = dict(v.materials)
        desc = mats[name].description if name in mats else ""
        mats[name] = UserMaterial(loss_db=float(value), description=desc)
        nv = v.model_copy(update={"materials": mats})
    elif inp.kind == "null_floor":
        nv = v.model_copy(update={"radio": r.model_copy(update={"null_floor_db": float(value)})})
    elif inp.kind == "road":
        k = int(value)
        upd = {"ground_reflection": False} if k < 0 else {"ground_reflection": True, "road_surface": ROAD_NAMES[k]}
        nv = v.model_copy(update={"radio": r.model_copy(update=upd)})
    elif inp.kind == "eirp":
        s = r.sensor
        delta = float(value) - r.sensor_eirp_dbm
        upd = {"eirp_dbm": s.eirp_dbm + delta} if s.eirp_dbm is not None else \
            {"conducted_power_dbm": s.conducted_power_dbm + delta}
        nv = v.model_copy(update={"radio": r.model_copy(update={"sensor": s.model_copy(update=upd)})})
    elif inp.kind == "frequency":
        nv = v.model_copy(update={"radio": r.model_copy(update={"frequency_hz": float(value)})})
    elif inp.kind == "cabin_absorption":
        nv = v.model_copy(update={"body": v.body.model_copy(update={"cabin_absorption_m2": float(value)})})
    else:
        raise ValueError(f"{inp.kind} is not a file field")
    check_vehicle(nv)
    return nv


__all__ = [
    "DEFAULT_DRAWS", "DEFAULT_SEED", "Draws", "PerturbationModel", "Sensitivity", "SpotSensitivity", "TornadoBar",
    "UncertainInput", "analyse", "analyse_scores", "body_materials", "nominal_draws", "random_draws",
    "tilted_axes", "uncertain_inputs", "vehicle_with",
]
