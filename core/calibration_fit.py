"""Fitting the model to measured levels: bounded, regularised, robust least squares, and a hold-out over spots.

What is compared (the *items*):

- a level with its wheel angle: the measured level at the antenna terminal against the model's level
  at that (spot, wheel, angle, frequency), exactly as the engine computes it (core.link_terms);
- levels without angles (a drive log): per (spot, wheel, frequency), the measured distribution's
  10th, 25th, 50th, 75th and 90th percentiles against those of the model's level over the turn
  (``FIT_TURN_ANGLES`` equally spaced angles). This assumes the transmissions sample the turn evenly,
  as they do at speeds that are not resonant (core.burst: frames landing on the same angle every
  turn); the measurement noise widens the measured distribution a little, which the model's lacks.

The fit minimises, over the parameters x of core.calibration.PARAMETERS within their bounds,

    sum_i rho( ((model_i(x) - measured_i) / s)^2 ) + sum_k ((x_k - prior_k) / width_k)^2

with rho the soft-L1 loss (quadratic within ``ROBUST_SCALE`` noise units, linear beyond: outliers
such as a dropped frame or a person walking past weigh less), s the noise scale of the items, and the
second sum the priors (the vehicle's own values, with the widths stated in core.calibration). The
noise scale starts at ``NOISE_START_DB`` and is re-estimated from the residuals (1.4826 times their
median absolute value, corrected for the parameters' degrees of freedom) until it settles; so the
priors weigh against data of the noise actually found. Solver: scipy.optimize.least_squares
(trust-region reflective, bounded). Standard errors: the square roots of the diagonal of (J^T J)^-1,
J the Jacobian of the scaled residuals at the solution (the Gauss-Newton approximation of the
posterior covariance, robust weights included); a parameter is *determined* by the measurements when
its standard error is at most ``INFORMED_SHARE`` of its prior width. A calibration applies every
parameter the measurements depend on: its *sensitivity*, the information the items carry on it alone
(the sum of its squared Jacobian column over the items) in units of its prior's information
(1 / width^2), is at least ``SENSITIVE_RATIO``, and the design identifies it. Parameters the measured
paths never touch (a material they do not cross, the tread loss under the installed wheel pattern, the
null floor where the cabin's diffuse field fills every null) have sensitivity 0 and keep the vehicle's
values. A parameter the items touch only faintly is not identifiable from the design: its standard
error stays over ``INFORMED_SHARE`` of its prior width and no strongly correlated partner fixes a
combination with it (the metal loss seen only from the middle of a cabin fed through its windows: the
diffuse field sets those levels, core.cavity). Its fitted value would be mostly the prior's pull
against the noise, so it is *held* at the prior (value = prior, standard error = prior width, not
informed, not applied) and the others are fitted again without it (one refit, started from the first
solution). Two parameters may each be undetermined while their combination is well fixed (when every
measured path crosses exactly one metal panel, the metal loss and the EIRP offset shift the levels
alike): both are applied, since together they reproduce the measurements, and their correlation (from
the covariance) is reported when it is 0.9 or more in size. The standard errors are those of the
linearised model at the solution: where a level depends on a loss far from linearly (a path through
metal sinking under the cabin's diffuse field as the metal loss grows) they understate the spread on
the flat side.

The hull panels' losses are bounded on their prior's side of the opening threshold
(core.calibration.Parameter.bounds): whether a panel is an opening feeding the cabin is the model's
structure, and the level jumps across it.

Hold-out: the spots are split into k folds (a seeded shuffle); each fold's items are predicted by a
fit to the other folds. The hold-out RMS (every item predicted once, by a fit that never saw its
spot) is the honest figure of what the calibrated model predicts at a spot not measured; it is given
beside the uncalibrated model's RMS on the same items.

References
----------
scipy.optimize.least_squares (Branch, Coleman, Li, SIAM J. Sci. Comput. 21(1), 1999: the trust-region
reflective method); Huber, Robust Statistics (1981), for the robust loss and the MAD scale estimate
(1.4826 = 1 / Phi^-1(3/4)); Hastie, Tibshirani, Friedman, The Elements of Statistical Learning, sec.
7.10 (k-fold cross-validation).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import UTC, datetime

import numpy as np
from scipy.optimize import least_squares
from scipy.stats import spearmanr

from core.bounds import MAX_FIT_LINKS, WorkLimitError
from core.calibration import (
    FORMAT_TAG,
    PARAMETERS,
    Calibration,
    FitRecord,
    FittedParameter,
    HoldOutRecord,
    Parameter,
    apply_values,
    contents_m2,
)
from core.link_terms import LinkTerms, cabin_of
from core.measurements import MeasurementSet
from core.scoring import Scene
from core.vehicle import Vehicle

#: wheel angles of the model's level over the turn (percentiles of drive logs, the GUI's curves)
FIT_TURN_ANGLES = 360
#: percentiles of a group of levels without angles that are compared
PERCENTILES = (10.0, 25.0, 50.0, 75.0, 90.0)
#: the noise scale the fit starts from, dB (a start value only: re-estimated from the residuals)
NOISE_START_DB = 3.0
#: the smallest noise scale used, dB (levels are logged to about 0.1 dB)
NOISE_MIN_DB = 0.1
#: residuals beyond this many noise scales weigh less (soft-L1 loss)
ROBUST_SCALE = 2.0
#: a parameter is determined when its standard error is at most this share of its prior width
INFORMED_SHARE = 0.5
#: a parameter is applied when the items' information on it alone is at least this times its prior's
SENSITIVE_RATIO = 1.0
#: correlations reported from this size on
STRONG_CORRELATION = 0.9
#: k of the k-fold hold-out, and the seed of the spots' shuffle
HOLDOUT_FOLDS = 5
HOLDOUT_SEED = 0
METHOD = (f"scipy.optimize.least_squares (trust-region reflective, bounds), soft-L1 loss at {ROBUST_SCALE:g} noise "
          f"scales, Gaussian priors; noise scale from the residuals' MAD; standard errors from the Jacobian; "
          f"levels without angles: percentiles {', '.join(f'{p:g}' for p in PERCENTILES)} against the model's over "
          f"{FIT_TURN_ANGLES} angles per turn")


@dataclass(frozen=True, eq=False)
class MeasurementModel:
    """The model's prediction of every item of a measurement set, for parameter values.

    Items (M,): first the levels with a wheel angle (``item_row``: their row in the set), then the
    percentiles of every group of levels without angles (``item_group``, ``item_percentile``).
    ``measured`` (M,): the measured value at the antenna terminal, dBm. ``item_spot`` (M,): the
    spot of each item. ``groups`` (G, 3): (spot, wheel, frequency index) of each group.
    """

    vehicle: Vehicle
    measurements: MeasurementSet
    parameters: tuple[Parameter, ...]
    scenes: dict
    measured: np.ndarray
    item_spot: np.ndarray
    item_row: np.ndarray
    item_group: np.ndarray
    item_percentile: np.ndarray
    groups: np.ndarray
    frequencies_hz: tuple[float, ...]
    angle_terms: tuple  # (LinkTerms, item indices) per frequency
    turn_terms: tuple  # (LinkTerms, group indices) per frequency: groups x FIT_TURN_ANGLES links
    wheel_model: str | None = None
    ground_reflection: bool | None = None
    _curves: dict = field(default_factory=dict)

    @classmethod
    def build(cls, vehicle: Vehicle, ms: MeasurementSet, parameters: tuple[Parameter, ...] = PARAMETERS,
              wheel_model: str | None = None, ground_reflection: bool | None = None) -> MeasurementModel:
        """Prepare the links of every item (the work the fit never repeats). ``wheel_model`` and
        ``ground_reflection`` override the vehicle's radio setup as in core.scoring.Scene.from_vehicle."""
        freqs = ms.frequencies_hz
        fidx = np.searchsorted(np.asarray(freqs), ms.frequency_hz)
        rows = np.flatnonzero(ms.has_angle)
        free = np.flatnonzero(~ms.has_angle)
        groups = np.empty((0, 3), int)
        if len(free):
            groups = np.unique(np.stack([ms.spot[free], ms.wheel[free], fidx[free]], axis=1), axis=0)
        links = len(rows) + len(groups) * FIT_TURN_ANGLES
        if links > MAX_FIT_LINKS:
            raise WorkLimitError(f"{ms.path or 'measurements'}: the fit would prepare {links:,} links, over the limit of "
                                 f"{MAX_FIT_LINKS:,} (core.bounds.MAX_FIT_LINKS): use fewer rows or fewer groups of "
                                 "levels without angles")
        scenes = {}
        for f in freqs:
            vf = vehicle if f == vehicle.radio.frequency_hz else vehicle.model_copy(
                update={"radio": vehicle.radio.model_copy(update={"frequency_hz": f})})
            scenes[f] = Scene.from_vehicle(vf, wheel_model=wheel_model, ground_reflection=ground_reflection)
        cabins = {f: cabin_of(sc) for f, sc in scenes.items()}  # one cabin per scene, shared by its links
        level = ms.antenna_level_dbm
        n_pct = len(PERCENTILES)
        measured = [level[rows]]
        item_spot = [ms.spot[rows]]
        angle_terms = []
        for k, f in enumerate(freqs):
            sel = np.flatnonzero(fidx[rows] == k)
            if len(sel):
                r = rows[sel]
                lt = LinkTerms.build(scenes[f], ms.wheel[r], ms.angle_rad[r], ms.spot_positions[ms.spot[r]],
                                     ms.spot_axes[ms.spot[r]], cabins[f])
                angle_terms.append((lt, sel))
        turn_terms = []
        theta = np.arange(FIT_TURN_ANGLES) * (2.0 * np.pi / FIT_TURN_ANGLES)
        for g, (s, w, k) in enumerate(groups):
            in_group = free[(ms.spot[free] == s) & (ms.wheel[free] == w) & (fidx[free] == k)]
            measured.append(np.percentile(level[in_group], PERCENTILES))
            item_spot.append(np.full(n_pct, s))
        for k, f in enumerate(freqs):
            gsel = np.flatnonzero(groups[:, 2] == k) if len(groups) else np.empty(0, int)
            if len(gsel):
                sp = np.repeat(groups[gsel, 0], FIT_TURN_ANGLES)
                lt = LinkTerms.build(scenes[f], np.repeat(groups[gsel, 1], FIT_TURN_ANGLES),
                                     np.tile(theta, len(gsel)), ms.spot_positions[sp], ms.spot_axes[sp], cabins[f])
                turn_terms.append((lt, gsel))
        n_rows = len(rows)
        return cls(
            vehicle=vehicle, measurements=ms, parameters=tuple(parameters), scenes=scenes,
            measured=np.concatenate(measured), item_spot=np.concatenate(item_spot).astype(int),
            item_row=np.concatenate([rows, np.full(len(groups) * n_pct, -1)]).astype(int),
            item_group=np.concatenate([np.full(n_rows, -1), np.repeat(np.arange(len(groups)), n_pct)]).astype(int),
            item_percentile=np.concatenate([np.full(n_rows, np.nan), np.tile(PERCENTILES, len(groups))]),
            groups=groups, frequencies_hz=freqs, angle_terms=tuple(angle_terms), turn_terms=tuple(turn_terms),
            wheel_model=wheel_model, ground_reflection=ground_reflection,
        )

    @property
    def keys(self) -> tuple[str, ...]:
        return tuple(p.key for p in self.parameters)

    @property
    def n_angle_items(self) -> int:
        return int((self.item_row >= 0).sum())

    def priors(self) -> np.ndarray:
        return np.array([p.prior(self.vehicle) for p in self.parameters])

    def _fast_arguments(self, x) -> dict | None:
        """Keyword arguments of LinkTerms.levels_dbm for values x; None when a parameter has no fast form."""
        kw: dict = {"material_loss_db": {}}
        for p, value in zip(self.parameters, x):
            if p.kind == "material" and p.material == "tire_tread":
                kw["tread_loss_db"] = float(value)
            elif p.kind == "material":
                kw["material_loss_db"][p.material] = float(value)
            elif p.kind == "eirp_offset":
                kw["eirp_offset_db"] = float(value)
            elif p.kind == "null_floor":
                kw["null_floor_db"] = float(value)
            elif p.kind == "contents":
                kw["contents_m2"] = contents_m2(value)
            else:
                return None
        return kw

    def predict(self, x=None) -> np.ndarray:
        """The model's value of every item (M,), dBm, for parameter values x (None: the vehicle as it is)."""
        kw = {} if x is None else self._fast_arguments(x)
        if kw is None:  # a parameter core.link_terms cannot vary: build the vehicle with the values (exact, slower)
            v = apply_values(self.vehicle, dict(zip(self.keys, x)))
            return MeasurementModel.build(v, self.measurements, (), self.wheel_model,
                                          self.ground_reflection).predict(None)
        out = np.empty(len(self.measured))
        for lt, sel in self.angle_terms:
            out[sel] = lt.levels_dbm(**kw)
        base = self.n_angle_items
        n_pct = len(PERCENTILES)
        for lt, gsel in self.turn_terms:
            levels = lt.levels_dbm(**kw).reshape(len(gsel), FIT_TURN_ANGLES)
            pct = np.percentile(levels, PERCENTILES, axis=1).T  # (g, P)
            idx = base + gsel[:, None] * n_pct + np.arange(n_pct)[None, :]
            out[idx] = pct
        return out

    def turn_curves(self, spot: int, x=None) -> tuple[np.ndarray, np.ndarray]:
        """(angles rad (A,), levels dBm (W, A)) of every wheel over the turn at a measured spot, at the
        vehicle's frequency, for values x (None: the vehicle as it is)."""
        key = int(spot)
        if key not in self._curves:
            scene = Scene.from_vehicle(self.vehicle, wheel_model=self.wheel_model,
                                       ground_reflection=self.ground_reflection)
            W = len(scene.wheels)
            theta = np.arange(FIT_TURN_ANGLES) * (2.0 * np.pi / FIT_TURN_ANGLES)
            ms = self.measurements
            lt = LinkTerms.build(scene, np.repeat(np.arange(W), FIT_TURN_ANGLES), np.tile(theta, W),
                                 np.broadcast_to(ms.spot_positions[key], (W * FIT_TURN_ANGLES, 3)),
                                 np.broadcast_to(ms.spot_axes[key], (W * FIT_TURN_ANGLES, 3)))
            self._curves[key] = (theta, lt, W)
        theta, lt, W = self._curves[key]
        kw = {} if x is None else self._fast_arguments(x)
        if kw is None:
            raise ValueError("turn curves need parameters the fast model can vary")
        return theta, lt.levels_dbm(**kw).reshape(W, FIT_TURN_ANGLES)


@dataclass(frozen=True, eq=False)
class FitResult:
    """A fit: per parameter (n,) prior, prior width, bounds, fitted value, standard error, informed;
    the items used (mask (M,)), their measured and predicted values before and after (dBm), the
    noise scale and residual RMS (dB), and how the solver ended."""

    parameters: tuple[Parameter, ...]
    prior: np.ndarray
    width: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    x: np.ndarray
    standard_error: np.ndarray
    informed: np.ndarray
    covariance: np.ndarray
    sensitivity: np.ndarray  # (n,) the items' information on each parameter alone / its prior's
    used: np.ndarray
    measured: np.ndarray
    predicted_before: np.ndarray
    predicted_after: np.ndarray
    noise_db: float
    rms_before_db: float
    rms_after_db: float
    function_evaluations: int
    message: str
    success: bool
    held: np.ndarray | None = None  # (n,) not identifiable from the items: held at the prior (see fit_model)

    @property
    def keys(self) -> tuple[str, ...]:
        return tuple(p.key for p in self.parameters)

    def values(self) -> dict[str, float]:
        return {k: float(v) for k, v in zip(self.keys, self.x)}

    @property
    def applied(self) -> np.ndarray:
        """(n,) True for the parameters the measurements depend on (sensitivity >= SENSITIVE_RATIO) and do not
        leave at the prior (``held``)."""
        ok = self.sensitivity >= SENSITIVE_RATIO
        return ok if self.held is None else ok & ~self.held

    def applied_values(self) -> dict[str, float]:
        """The values of the applied parameters, key -> dB."""
        return {k: float(v) for k, v, ok in zip(self.keys, self.x, self.applied) if ok}

    def correlation(self) -> np.ndarray:
        """(n, n) correlation matrix of the fitted values."""
        return _correlation(self.covariance, self.standard_error)

    def strongest_correlation(self, i: int) -> tuple[int, float]:
        """(index, correlation) of the parameter most correlated with parameter i; (-1, 0) when none is."""
        c = self.correlation()[i].copy()
        c[i] = 0.0
        if len(c) < 2:
            return -1, 0.0
        j = int(np.argmax(np.abs(c)))
        return j, float(c[j])

    def fitted_parameters(self) -> list[FittedParameter]:
        out = []
        for i, p in enumerate(self.parameters):
            j, r = self.strongest_correlation(i)
            strong = j >= 0 and abs(r) >= STRONG_CORRELATION
            out.append(FittedParameter(
                key=p.key, label=p.label, prior_db=round(float(self.prior[i]), 6), prior_width_db=p.prior_width_db,
                value_db=round(float(self.x[i]), 6), standard_error_db=round(float(self.standard_error[i]), 6),
                informed=bool(self.informed[i]), sensitivity=round(float(self.sensitivity[i]), 4),
                applied=bool(self.applied[i]), correlated_with=self.parameters[j].key if strong else None,
                correlation=round(r, 4) if strong else None,
                lower_db=float(self.lower[i]), upper_db=float(self.upper[i])))
        return out


def _rms(r: np.ndarray) -> float:
    return float(np.sqrt(np.mean(np.square(r)))) if len(r) else 0.0


def _mixed_loss(n_data: int):
    """least_squares loss: soft-L1 on the first n_data residuals (the items), quadratic on the priors."""

    def loss(z: np.ndarray) -> np.ndarray:
        rho = np.empty((3, len(z)))
        zd = z[:n_data]
        t = 1.0 + zd
        rho[0, :n_data] = 2.0 * (np.sqrt(t) - 1.0)
        rho[1, :n_data] = 1.0 / np.sqrt(t)
        rho[2, :n_data] = -0.5 * t ** -1.5
        rho[0, n_data:] = z[n_data:]
        rho[1, n_data:] = 1.0
        rho[2, n_data:] = 0.0
        return rho

    return loss


def fit_model(model: MeasurementModel, used: np.ndarray | None = None, max_rounds: int = 5) -> FitResult:
    """Fit the model's parameters to the items ``used`` (a mask (M,); default all); see the module notes."""
    M = len(model.measured)
    used = np.ones(M, bool) if used is None else np.asarray(used, bool)
    meas = model.measured[used]
    params = model.parameters
    n = len(params)
    prior = model.priors()
    width = np.array([p.prior_width_db for p in params])
    lower, upper = np.array([p.bounds(model.vehicle) for p in params]).reshape(n, 2).T
    before = model.predict(None)
    if n == 0:
        r = before[used] - meas
        return FitResult((), prior, width, lower, upper, prior, np.zeros(0), np.zeros(0, bool), np.zeros((0, 0)),
                         np.zeros(0), used, model.measured, before, before, max(NOISE_MIN_DB, _rms(r)), _rms(r),
                         _rms(r), 0, "no parameters to fit", True)
    fit = _solve(model, used, meas, prior, width, lower, upper, np.ones(n, bool), max_rounds)
    # a parameter the items barely touch is not identifiable from this design: its standard error stays near
    # its prior width and no strongly correlated partner fixes a combination with it. Its fitted value would be
    # mostly the prior's pull against noise: it is held at the prior and the others are fitted again.
    corr = _correlation(fit["cov"], fit["se"])
    np.fill_diagonal(corr, 0.0)
    paired = np.any(np.abs(corr) >= STRONG_CORRELATION, axis=1)
    informed = fit["se"] <= INFORMED_SHARE * width
    held = ~informed & ~paired
    if held.any() and not held.all():
        again = _solve(model, used, meas, prior, width, lower, upper, ~held, max_rounds, fit["x"], fit["noise"])
        again["nfev"] += fit["nfev"]
        fit = again
    elif held.all():
        held[:] = False  # nothing else to fit: the result is the fit as it is, reported as not informed
    x, cov, se, sensitivity, noise = fit["x"], fit["cov"], fit["se"], fit["sensitivity"], fit["noise"]
    after = model.predict(x)
    return FitResult(
        parameters=params, prior=prior, width=width, lower=lower, upper=upper, x=x, standard_error=se,
        informed=(se <= INFORMED_SHARE * width) & ~held, covariance=cov, sensitivity=sensitivity, used=used,
        measured=model.measured,
        predicted_before=before, predicted_after=after, noise_db=float(noise),
        rms_before_db=_rms(before[used] - meas), rms_after_db=_rms(after[used] - meas),
        function_evaluations=int(fit["nfev"]), message=fit["message"], success=fit["success"], held=held,
    )


def _correlation(cov: np.ndarray, se: np.ndarray) -> np.ndarray:
    s = np.where(se > 0, se, 1.0)
    return cov / np.outer(s, s)


def _solve(model: MeasurementModel, used, meas, prior, width, lower, upper, free: np.ndarray, max_rounds: int,
           start: np.ndarray | None = None, noise_start: float = NOISE_START_DB) -> dict:
    """The robust, regularised least squares over the parameters ``free`` (the others at their priors), the
    noise scale re-estimated from the residuals until it settles; the covariance of the free parameters
    from the Jacobian at the solution (the held ones: their prior width, uncorrelated) and the items'
    sensitivity to every parameter. ``start``, ``noise_start``: where the solver starts (default: the priors
    and NOISE_START_DB)."""
    n = len(prior)
    nd = len(meas)
    k = int(free.sum())
    noise = noise_start
    # start strictly inside the bounds (least_squares requires it)
    span = upper - lower
    x0 = np.clip(prior if start is None else start, lower + 1e-6 * span, upper - 1e-6 * span)

    def whole(xf):
        """All parameters: the free ones ``xf``, the held ones at their priors."""
        out = prior.copy()
        out[free] = xf
        return out

    def residuals(xx, s):
        """Scaled residuals of the items and the priors for all parameters ``xx``."""
        return np.concatenate([(model.predict(xx)[used] - meas) / s, (xx - prior) / width])

    def fun(xf, s):
        return np.delete(residuals(whole(xf), s), nd + np.flatnonzero(~free))

    xf = x0[free]
    nfev = 0
    res = None
    for _ in range(max_rounds):
        res = least_squares(fun, xf, args=(noise,), bounds=(lower[free], upper[free]), loss=_mixed_loss(nd),
                            f_scale=ROBUST_SCALE, x_scale=width[free], method="trf", xtol=1e-8, ftol=1e-10,
                            gtol=1e-10, max_nfev=200 * k)
        nfev += res.nfev
        xf = res.x
        r = model.predict(whole(xf))[used] - meas
        dof = max(nd - k, 1)
        new = max(NOISE_MIN_DB, 1.4826 * float(np.median(np.abs(r))) * np.sqrt(nd / dof))
        settled = abs(new - noise) <= 0.02 * noise
        noise = new
        if settled:
            break
    x = whole(xf)
    # one more Jacobian at the solution, at the final noise scale, over every parameter (the held ones at their
    # priors, strictly inside the bounds): the sensitivities; the covariance of the free ones
    xj = np.clip(x, lower + 1e-6 * span, upper - 1e-6 * span)
    final = least_squares(residuals, xj, args=(noise,), bounds=(lower, upper),
                          loss=_mixed_loss(nd), f_scale=ROBUST_SCALE, x_scale=width, method="trf", max_nfev=1)
    nfev += final.nfev
    J = final.jac
    sensitivity = np.sum(J[:nd] ** 2, axis=0) * width ** 2  # the items' information on each alone / the prior's
    Jf = J[:, free]
    cov = np.zeros((n, n))
    cov[np.ix_(free, free)] = np.linalg.pinv(Jf.T @ Jf)
    held = ~free
    cov[held, held] = width[held] ** 2
    se = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    return {"x": x, "cov": cov, "se": se, "sensitivity": sensitivity, "noise": noise, "nfev": nfev,
            "message": str(res.message), "success": bool(res.success)}


@dataclass(frozen=True, eq=False)
class HoldOut:
    """k-fold hold-out over spots: each item predicted by a fit that never saw its spot.

    ``fold_spots``: the spot indices of each fold; ``predicted`` (M,): the held-out prediction of
    every item (dBm); ``rms_before_db`` / ``rms_after_db``: RMS of the uncalibrated and the held-out
    calibrated prediction over all items, dB; ``fits``: the fit of each fold."""

    fold_spots: tuple[tuple[int, ...], ...]
    predicted: np.ndarray
    rms_before_db: float
    rms_after_db: float
    fits: tuple[FitResult, ...]

    @property
    def folds(self) -> int:
        return len(self.fold_spots)


def holdout(model: MeasurementModel, folds: int = HOLDOUT_FOLDS, seed: int = HOLDOUT_SEED) -> HoldOut | None:
    """k-fold hold-out over the measured spots (k = min(folds, spots)); None with fewer than two spots."""
    spots = np.unique(model.item_spot)
    k = min(int(folds), len(spots))
    if k < 2:
        return None
    perm = np.random.default_rng(seed).permutation(spots)
    fold_spots = tuple(tuple(sorted(int(s) for s in perm[i::k])) for i in range(k))
    predicted = np.empty(len(model.measured))
    fits = []
    for spots_f in fold_spots:
        test = np.isin(model.item_spot, spots_f)
        r = fit_model(model, ~test)
        predicted[test] = r.predicted_after[test]
        fits.append(r)
    before = model.predict(None)
    return HoldOut(fold_spots, predicted, _rms(before - model.measured), _rms(predicted - model.measured), tuple(fits))


@dataclass(frozen=True)
class RankAgreement:
    """How well predicted spot statistics rank the measured ones (Spearman's rho), uncalibrated and
    calibrated, over the test spots; ``statistic``: what is ranked per spot."""

    spots: tuple[str, ...]
    measured: np.ndarray
    before: np.ndarray
    after: np.ndarray
    rho_before: float
    rho_after: float
    statistic: str


def spot_statistic(model: MeasurementModel, values: np.ndarray, spots, percentile: float = 10.0) -> np.ndarray:
    """Per spot: the worst wheel's ``percentile`` of the levels with angles (values (M,), dBm), dB."""
    out = []
    ms = model.measurements
    rows = model.item_row
    for s in spots:
        per_wheel = []
        for w in np.unique(ms.wheel):
            sel = (rows >= 0) & (model.item_spot == s)
            sel[sel] = ms.wheel[rows[sel]] == w
            if sel.any():
                per_wheel.append(np.percentile(values[sel], percentile))
        out.append(min(per_wheel) if per_wheel else np.nan)
    return np.asarray(out, float)


def holdout_rank_agreement(model: MeasurementModel, train_spots, test_spots, percentile: float = 10.0) -> RankAgreement:
    """Calibrate on ``train_spots`` (spot indices), then rank ``test_spots`` by the worst wheel's
    ``percentile`` of the levels over the turn: Spearman's rho between measured and predicted, with
    the uncalibrated model and with the calibrated one. (The check with stored whole-vehicle full-wave
    levels used as measurements: calibration on five spots should raise the agreement on the other five.)"""
    train = np.isin(model.item_spot, list(train_spots))
    fit = fit_model(model, train)
    test = tuple(int(s) for s in test_spots)
    meas = spot_statistic(model, model.measured, test, percentile)
    before = spot_statistic(model, fit.predicted_before, test, percentile)
    after = spot_statistic(model, fit.predicted_after, test, percentile)
    rho_b = float(spearmanr(meas, before).statistic)
    rho_a = float(spearmanr(meas, after).statistic)
    names = tuple(model.measurements.spot_names[s] for s in test)
    return RankAgreement(names, meas, before, after, rho_b, rho_a,
                         f"worst wheel's {percentile:g}th percentile of the levels with angles")


# ----- the whole calibration ----------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class CalibrationRun:
    """Everything one calibration produced: the file's content, the model, the fit, the hold-out."""

    calibration: Calibration
    model: MeasurementModel
    fit: FitResult
    holdout: HoldOut | None


def calibrate(vehicle: Vehicle, ms: MeasurementSet, vehicle_source: dict, parameters: tuple[Parameter, ...] = PARAMETERS,
              folds: int = HOLDOUT_FOLDS, wheel_model: str | None = None, ground_reflection: bool | None = None,
              command_line: list[str] | None = None, now: datetime | None = None,
              caution: str = "") -> CalibrationRun:
    """Fit, hold out, and assemble the calibration file's content (core.calibration.Calibration).

    ``vehicle_source``: the ``vehicle_file`` setup record (core.provenance.load_with_source);
    ``caution``: the safety caution the file carries (the front end's)."""
    from core.provenance import setup_record

    model = MeasurementModel.build(vehicle, ms, parameters, wheel_model, ground_reflection)
    fit = fit_model(model)
    hold = holdout(model, folds)
    scene = model.scenes[vehicle.radio.frequency_hz] if vehicle.radio.frequency_hz in model.scenes else \
        Scene.from_vehicle(vehicle, wheel_model=wheel_model, ground_reflection=ground_reflection)
    overrides = {"wheel_model": wheel_model, "ground_reflection": ground_reflection}
    setup = setup_record(vehicle, scene, vehicle_source, command_line, overrides,
                         extra={"calibration": {"method": METHOD, "holdout_folds": folds, "holdout_seed": HOLDOUT_SEED}})
    n_angle = model.n_angle_items
    cal = Calibration(
        format=FORMAT_TAG,
        created=(now or datetime.now(UTC).astimezone()).isoformat(timespec="seconds"),
        vehicle={"name": vehicle.name, "body_style": vehicle.body_style, "file": vehicle_source.get("path"),
                 "sha256": vehicle_source.get("sha256")},
        measurements={"file": ms.path or None, "sha256": ms.sha256, **ms.summary(),
                      "spot_positions_m": {n: [round(float(c), 4) for c in p]
                                           for n, p in zip(ms.spot_names, ms.spot_positions)}},
        model={"wheel_model": scene.wheel_model_label, "ground_reflection": bool(scene.ground_reflection),
               "frequencies_hz": list(model.frequencies_hz)},
        parameters=fit.fitted_parameters(),
        fit=FitRecord(items=len(model.measured), items_with_angle=n_angle,
                      percentile_items=len(model.measured) - n_angle, rms_before_db=round(fit.rms_before_db, 4),
                      rms_after_db=round(fit.rms_after_db, 4), noise_db=round(fit.noise_db, 4), method=METHOD,
                      function_evaluations=fit.function_evaluations, message=fit.message),
        holdout=None if hold is None else HoldOutRecord(
            folds=hold.folds, items=len(model.measured), rms_before_db=round(hold.rms_before_db, 4),
            rms_after_db=round(hold.rms_after_db, 4),
            fold_spots=[[ms.spot_names[s] for s in f] for f in hold.fold_spots]),
        setup=setup,
        caution=caution,
    )
    return CalibrationRun(cal, model, fit, hold)
