"""Material parameters and per-material crossing loss vs frequency, each value with its source.

Three parts:

1. ITU-R P.2040 Table 3 regression coefficients (eta' = a f^b, sigma = c f^d, f in GHz)
   and :func:`p2040_properties`.
2. Road surfaces for the ground reflection (:data:`ROAD_SURFACES`, :func:`road_permittivity`).
3. The crossing-loss registry used by the body and wheel models (:class:`Material`,
   :data:`BUILTIN_MATERIALS`, :func:`material_loss_db`), plus the normal-incidence slab loss
   :func:`slab_transmission_loss_db` from which the plastic and composite values are computed.

Which values are published and which are engineering defaults is stated per entry
(``Material.engineering_default``) and in docs/model-notes-propagation.md.

References
----------
- ITU-R P.2040 (-1 and later), Effects of building materials and structures on
  radiowave propagation above about 100 MHz, section 2 and Table 3.
- 3GPP TR 38.901 (V16/V17), Study on channel model for frequencies from 0.5 to 100 GHz,
  section 7.4.3, Table 7.4.3-1 (material penetration losses).
- Textbook plane-wave transmission through a dielectric slab (e.g. D. M. Pozar,
  Microwave Engineering, ch. 2 and 4; C. A. Balanis, Advanced Engineering
  Electromagnetics, sec. 5.5, multiple reflections between two interfaces).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from core.propagation import C0_M_PER_S, complex_permittivity

__all__ = [
    "P2040Row",
    "P2040_TABLE3",
    "p2040_properties",
    "RoadSurface",
    "ROAD_SURFACES",
    "road_permittivity",
    "slab_transmission_loss_db",
    "Material",
    "BUILTIN_MATERIALS",
    "MATERIAL_NAMES",
    "material_loss_db",
]


# ---------------------------------------------------------------------------
# ITU-R P.2040 Table 3
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class P2040Row:
    """One row of ITU-R P.2040 Table 3.

    eta' = a f^b, sigma = c f^d [S/m], f in GHz, valid over f_min_ghz..f_max_ghz.
    ``note`` records where the numbers were checked.
    """

    name: str
    a: float
    b: float
    c: float
    d: float
    f_min_ghz: float
    f_max_ghz: float
    note: str


#: ITU-R P.2040 Table 3 rows used by Wheelreach. The glass, concrete and metal values are
#: the ones quoted in the project's design brief (cross-checked against secondary copies
#: of the Recommendation). The three ground rows are from memory and agree with several
#: secondary copies of the table; they are marked so.
P2040_TABLE3: dict[str, P2040Row] = {
    "glass": P2040Row("glass", 6.31, 0.0, 0.0036, 1.3394, 0.1, 100.0, "ITU-R P.2040 Table 3"),
    "concrete": P2040Row("concrete", 5.24, 0.0, 0.0462, 0.7822, 1.0, 100.0, "ITU-R P.2040 Table 3"),
    "metal": P2040Row("metal", 1.0, 0.0, 1.0e7, 0.0, 1.0, 100.0, "ITU-R P.2040 Table 3"),
    "very dry ground": P2040Row(
        "very dry ground", 3.0, 0.0, 0.00015, 2.52, 1.0, 10.0,
        "ITU-R P.2040 Table 3 (from memory; agrees with secondary copies of the table)",
    ),
    "medium dry ground": P2040Row(
        "medium dry ground", 15.0, -0.1, 0.035, 1.63, 1.0, 10.0,
        "ITU-R P.2040 Table 3 (from memory; agrees with secondary copies of the table)",
    ),
    "wet ground": P2040Row(
        "wet ground", 30.0, -0.4, 0.15, 1.30, 1.0, 10.0,
        "ITU-R P.2040 Table 3 (from memory; agrees with secondary copies of the table)",
    ),
}


def _p2040_row(name: str) -> P2040Row:
    try:
        return P2040_TABLE3[name]
    except KeyError:
        raise KeyError(
            f"unknown ITU-R P.2040 material {name!r}; known: {', '.join(sorted(P2040_TABLE3))}"
        ) from None


def p2040_properties(name: str, freq_hz: ArrayLike) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Real relative permittivity and conductivity of an ITU-R P.2040 Table 3 material.

    eta' = a f^b, sigma = c f^d, f in GHz.

    Parameters
    ----------
    name : str
        Row of :data:`P2040_TABLE3` ("glass", "concrete", "metal", "very dry ground",
        "medium dry ground", "wet ground").
    freq_hz : array_like
        Frequency in Hz.

    Returns
    -------
    eps_real : ndarray
        eta' (dimensionless).
    sigma_s_per_m : ndarray
        Conductivity in S/m.
    in_range : ndarray of bool
        True where freq_hz lies in the row's stated validity range. Glass is specified
        from 0.1 GHz, so 315/433.92 MHz are in range; concrete, metal and the ground rows
        are specified from 1 GHz, so their use at 315/433.92 MHz is an extrapolation of
        the regression (in_range is False there) and results are indicative only.

    References
    ----------
    ITU-R P.2040, section 2.1.4 and Table 3.
    """
    row = _p2040_row(name)
    f_ghz = np.asarray(freq_hz, dtype=float) / 1e9
    eps_real = row.a * f_ghz**row.b
    sigma = row.c * f_ghz**row.d
    in_range = (f_ghz >= row.f_min_ghz) & (f_ghz <= row.f_max_ghz)
    return eps_real, sigma, in_range


# ---------------------------------------------------------------------------
# Road surfaces
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class RoadSurface:
    """A road surface for the ground reflection, defined by an ITU-R P.2040 row."""

    name: str
    p2040_row: str
    note: str


_EXTRAPOLATION_NOTE = (
    "P.2040 specifies this row from 1 GHz; at 315/433.92 MHz the regression is "
    "extrapolated (indicative only)."
)

#: Road surfaces offered for the ground reflection. P.2040 has no asphalt row: the
#: concrete row stands in for dry asphalt and concrete pavement (a proxy; asphalt's
#: permittivity is of the same order, about 3-6 (from memory)). All rows used here are
#: specified from 1 GHz, so at the TPMS bands they are an extrapolation.
ROAD_SURFACES: dict[str, RoadSurface] = {
    "dry asphalt/concrete": RoadSurface(
        "dry asphalt/concrete", "concrete",
        "ITU-R P.2040 Table 3 concrete row used as a proxy for dry asphalt and concrete "
        "pavement. " + _EXTRAPOLATION_NOTE,
    ),
    "very dry ground": RoadSurface(
        "very dry ground", "very dry ground", "ITU-R P.2040 Table 3. " + _EXTRAPOLATION_NOTE
    ),
    "medium dry ground": RoadSurface(
        "medium dry ground", "medium dry ground", "ITU-R P.2040 Table 3. " + _EXTRAPOLATION_NOTE
    ),
    "wet ground": RoadSurface(
        "wet ground", "wet ground",
        "ITU-R P.2040 Table 3; also a stand-in for a wet road. " + _EXTRAPOLATION_NOTE,
    ),
}


def road_permittivity(name: str, freq_hz: ArrayLike) -> np.ndarray:
    """Complex relative permittivity eps' - j sigma/(omega eps0) of a road surface.

    Parameters
    ----------
    name : str
        Key of :data:`ROAD_SURFACES`.
    freq_hz : array_like
        Frequency in Hz.

    Notes
    -----
    "dry asphalt/concrete" uses the P.2040 concrete row as a proxy. All rows are
    specified from 1 GHz; at 315/433.92 MHz they are extrapolated.

    References
    ----------
    ITU-R P.2040, section 2 (eta = eta' - j 17.98 sigma / f[GHz]) and Table 3.
    """
    try:
        surface = ROAD_SURFACES[name]
    except KeyError:
        raise KeyError(
            f"unknown road surface {name!r}; known: {', '.join(ROAD_SURFACES)}"
        ) from None
    eps_real, sigma, _ = p2040_properties(surface.p2040_row, freq_hz)
    return complex_permittivity(eps_real, sigma, freq_hz)


# ---------------------------------------------------------------------------
# Slab transmission
# ---------------------------------------------------------------------------


def slab_transmission_loss_db(eps_complex: ArrayLike, thickness_m: ArrayLike, freq_hz: ArrayLike) -> np.ndarray:
    """Normal-incidence transmission loss of a homogeneous slab in air, in dB (>= 0).

    With n = sqrt(eps) (principal branch, time factor e^{j omega t}, so eps = eps' - j eps''
    and Im n <= 0), Gamma = (1 - n) / (1 + n) at the air/slab face and
    delta = 2 pi f n t / c the complex electrical thickness, the plane-wave transmission
    coefficient summed over all internal reflections is

        T = (1 - Gamma^2) e^{-j delta} / (1 - Gamma^2 e^{-2 j delta}),

    identical to the ABCD (transmission-line) result T = 2 / (A + B/Z0 + C Z0 + D) of a
    line section of impedance Z0/n and length t, written so that it does not overflow for
    thick lossy slabs. Loss = -20 log10 |T|. A lossless slab of half a wavelength in the
    material (n t = lambda/2) has 0 dB loss.

    Parameters
    ----------
    eps_complex : array_like (complex)
        Relative complex permittivity of the slab (non-magnetic).
    thickness_m : array_like
        Slab thickness in m.
    freq_hz : array_like
        Frequency in Hz.

    References
    ----------
    Pozar, Microwave Engineering (ABCD matrix of a transmission line, sec. 4.4);
    Balanis, Advanced Engineering Electromagnetics, sec. 5.5 (multiple reflections
    between two interfaces); ITU-R P.2040 section 3 (single-layer slab).
    """
    eps = np.asarray(eps_complex, dtype=complex)
    t = np.asarray(thickness_m, dtype=float)
    f = np.asarray(freq_hz, dtype=float)
    n = np.sqrt(eps)
    gamma = (1.0 - n) / (1.0 + n)
    delta = 2.0 * np.pi * f * n * t / C0_M_PER_S
    with np.errstate(under="ignore"):
        e1 = np.exp(-1j * delta)
        trans = (1.0 - gamma**2) * e1 / (1.0 - gamma**2 * e1 * e1)
    # Cap at 3000 dB so a metal slab gives a huge finite loss rather than log10(0).
    return -20.0 * np.log10(np.maximum(np.abs(trans), 1e-150))


# ---------------------------------------------------------------------------
# Crossing-loss registry
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Material:
    """A panel or tire material with its crossing loss vs frequency.

    Attributes
    ----------
    name : str
        Registry key.
    description : str
        What the material stands for, in plain words.
    source : str
        Where the loss value comes from (standard, formula, or "engineering default").
    loss_db_at : callable
        ``loss_db_at(freq_hz) -> ndarray`` crossing loss in dB (>= 0), broadcast over
        freq_hz.
    engineering_default : bool
        True when the value is a parameter chosen by engineering judgement rather
        than a published figure; the user should override it with measurements.
    """

    name: str
    description: str
    source: str
    loss_db_at: Callable[[ArrayLike], np.ndarray]
    engineering_default: bool = True


def _constant_loss(loss_db: float) -> Callable[[ArrayLike], np.ndarray]:
    def loss_db_at(freq_hz: ArrayLike) -> np.ndarray:
        return np.full(np.shape(freq_hz), float(loss_db))

    return loss_db_at


def _glass_3gpp_loss_db(freq_hz: ArrayLike) -> np.ndarray:
    """3GPP TR 38.901 Table 7.4.3-1 standard glass: L = 2 + 0.2 f[GHz] dB."""
    return 2.0 + 0.2 * np.asarray(freq_hz, dtype=float) / 1e9


def _slab_loss(eps_real: float, loss_tangent: float, thickness_m: float) -> Callable[[ArrayLike], np.ndarray]:
    eps = eps_real * (1.0 - 1j * loss_tangent)

    def loss_db_at(freq_hz: ArrayLike) -> np.ndarray:
        return slab_transmission_loss_db(eps, thickness_m, freq_hz)

    return loss_db_at


#: Plastic panel (bumper cover, trim, tailgate skin): a typical filled polypropylene-type
#: polymer. Engineering default: eps' = 2.8, tan delta = 0.01, 3 mm.
PLASTIC_EPS_REAL = 2.8
PLASTIC_LOSS_TANGENT = 0.01
PLASTIC_THICKNESS_M = 0.003
#: Glass-fibre reinforced polymer panel. Engineering default: eps' = 4.5,
#: tan delta = 0.015, 3 mm.
COMPOSITE_EPS_REAL = 4.5
COMPOSITE_LOSS_TANGENT = 0.015
COMPOSITE_THICKNESS_M = 0.003

#: Engineering defaults (not physics) for the opaque-ish materials, in dB.
METAL_CROSSING_LOSS_DB = 20.0
TIRE_SIDEWALL_LOSS_DB = 1.5
TIRE_TREAD_LOSS_DB = 10.0

BUILTIN_MATERIALS: dict[str, Material] = {
    "metal": Material(
        name="metal",
        description="sheet-metal body panel, including its seams, gaps and joints",
        source=(
            "engineering default: a solid steel sheet is opaque (skin depth of micrometres); "
            "what passes is leakage through seams, gaps and openings, so the crossing loss "
            f"is a parameter ({METAL_CROSSING_LOSS_DB:g} dB), not physics. For scale, 3GPP TR "
            "38.901 sec. 7.4.3.2 gives 20 dB mean car penetration with metallized windows."
        ),
        loss_db_at=_constant_loss(METAL_CROSSING_LOSS_DB),
        engineering_default=True,
    ),
    "glass": Material(
        name="glass",
        description="window glass (windscreen, side and rear windows, uncoated)",
        source=(
            "3GPP TR 38.901 Table 7.4.3-1, standard glass: 2 + 0.2 f[GHz] dB (2.06 dB at "
            "315 MHz). Specified from 0.5 GHz; extrapolated below. Chosen over the P.2040 "
            "normal-incidence slab (about 0.03 dB for 4 mm glass at 315 MHz) because it is a "
            "measured-based penetration figure that includes oblique incidence and frames, "
            "and errs on the safe side for a worst-case placement tool."
        ),
        loss_db_at=_glass_3gpp_loss_db,
        engineering_default=False,
    ),
    "plastic": Material(
        name="plastic",
        description="plastic panel (bumper cover, trim, tailgate skin)",
        source=(
            "normal-incidence slab loss (textbook ABCD/transmission-line method) of a "
            f"typical polymer; permittivity eps' = {PLASTIC_EPS_REAL:g}, tan delta = "
            f"{PLASTIC_LOSS_TANGENT:g}, thickness {PLASTIC_THICKNESS_M * 1e3:g} mm are "
            "engineering defaults"
        ),
        loss_db_at=_slab_loss(PLASTIC_EPS_REAL, PLASTIC_LOSS_TANGENT, PLASTIC_THICKNESS_M),
        engineering_default=True,
    ),
    "open": Material(
        name="open",
        description="opening with no panel (0 dB)",
        source="no material: 0 dB by definition",
        loss_db_at=_constant_loss(0.0),
        engineering_default=False,
    ),
    "tire_sidewall": Material(
        name="tire_sidewall",
        description="tire sidewall (rubber and textile plies, no steel belt)",
        source=f"engineering default ({TIRE_SIDEWALL_LOSS_DB:g} dB; typical range 1-2 dB)",
        loss_db_at=_constant_loss(TIRE_SIDEWALL_LOSS_DB),
        engineering_default=True,
    ),
    "tire_tread": Material(
        name="tire_tread",
        description="tire tread over the steel belt",
        source=f"engineering default ({TIRE_TREAD_LOSS_DB:g} dB; typical range 8-15 dB)",
        loss_db_at=_constant_loss(TIRE_TREAD_LOSS_DB),
        engineering_default=True,
    ),
    "composite": Material(
        name="composite",
        description=(
            "glass-fibre reinforced polymer (GRP) panel; carbon-fibre panels conduct and "
            "should be treated as metal or overridden"
        ),
        source=(
            "normal-incidence slab loss (textbook ABCD/transmission-line method); "
            f"eps' = {COMPOSITE_EPS_REAL:g}, tan delta = {COMPOSITE_LOSS_TANGENT:g}, "
            f"thickness {COMPOSITE_THICKNESS_M * 1e3:g} mm are engineering defaults"
        ),
        loss_db_at=_slab_loss(COMPOSITE_EPS_REAL, COMPOSITE_LOSS_TANGENT, COMPOSITE_THICKNESS_M),
        engineering_default=True,
    ),
}

#: Names of the built-in materials, in a stable order.
MATERIAL_NAMES: tuple[str, ...] = tuple(BUILTIN_MATERIALS)


def material_loss_db(
    name: str,
    freq_hz: ArrayLike,
    overrides: Mapping[str, float] | None = None,
) -> np.ndarray:
    """Crossing loss of a material at a frequency, in dB.

    Parameters
    ----------
    name : str
        A built-in material (:data:`MATERIAL_NAMES`) or a user-defined one given in
        ``overrides``.
    freq_hz : array_like
        Frequency in Hz; the result has its shape.
    overrides : mapping of str to float, optional
        Fixed crossing losses in dB by material name. An entry replaces the built-in
        value of the same name, or defines a new material.

    Raises
    ------
    KeyError
        When ``name`` is neither overridden nor built in.
    """
    if overrides is not None and name in overrides:
        return np.full(np.shape(freq_hz), float(overrides[name]))
    try:
        material = BUILTIN_MATERIALS[name]
    except KeyError:
        known = list(MATERIAL_NAMES) + sorted(set(overrides or {}) - set(MATERIAL_NAMES))
        raise KeyError(
            f"unknown material {name!r}: not a built-in material and not in the overrides; "
            f"known materials: {', '.join(known)}"
        ) from None
    return material.loss_db_at(freq_hz)
