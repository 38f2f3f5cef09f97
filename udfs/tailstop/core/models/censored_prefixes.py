"""Censored Weibull, lognormal and known-shape gamma fits of every prefix of a log at once, in about O(n).

Refitting every prefix of a log with suspended units from scratch is
quadratic: each fit reads every unit of its prefix at each Newton step. Here
the prefixes share one expansion point. Write the log-likelihood of the
log-location-scale family (``censored_log_location``) around a reference
(μ₀, b₀), with z⁰ = (log t - μ₀)/b₀ for each unit, in the coordinates

    A = b₀/b - 1,   B = (μ₀ - μ)/b,   so that z = (log t - μ)/b = z⁰ + A z⁰ + B.

In (1/b, μ/b), and so in (A, B), the censored log-likelihood of a family with
log-concave density and survival function is concave (Burridge, J. R. Stat.
Soc. B 43 (1981) 41–45; Pratt, JASA 76 (1981) 103–106), so Newton's method
from (0, 0) converges fast for every prefix near the reference. Each unit
contributes T(z⁰ + Δ) with Δ = A z⁰ + B (T = log g for a failure, log Ḡ for
a suspension) and the failures add r log(1 + A). Taylor's theorem in Δ and
the binomial theorem give

    Σ T(z) = Σ_{i+j<=K} A^i B^j C_ij,   C_ij = Σ T^{(i+j)}(z⁰) (z⁰)^i / (i! j!),

and the C_ij of every prefix are running sums. The series is cut after
degree K = _DEGREE and used only while every unit's |Δ| <= _REACH:

* Weibull (extreme value): T^{(k)} = -e^z for k >= 2, so the cut costs at most
  e^{_REACH} _REACH^{K+1}/(K+1)! < 1e-16 of each unit's own e^z term.
* lognormal: log Φ(-z) is analytic within about 2.8 of the real axis (the
  zeros of erfc(z/√2) nearest to it are at z ≈ -1.92 ± 2.82i), so its Taylor
  terms fall like (_REACH / 2.8)^k, below 1e-13 at the cut; the failures'
  -z²/2 is exact, so only suspended units limit the reach.

* gamma with a known shape a (log X - log s has density e^{a z - e^z}/Γ(a) and
  survival Q(a, e^z): width 1, A = 0): the failures' terms are those of the
  Weibull (times a in the linear part), the suspensions' log Q(a, e^z) has
  derivatives -h^{(k-1)}, h the hazard, polynomials in h and a - e^z + h;
  log X is about normal with sd 1/√a for a large shape, so its series
  converges within about 2.8/√a and the suspensions' reach is _REACH/√a;
  shapes above GAMMA_LARGEST_SHAPE are left to the fits one check point at
  a time.
* a unit whose derivatives are evaluated from terms of size M^k (M = |z| for
  the normal hazard, e^z or a for the gamma one) loses about ε M^{k+1} to
  rounding, so its reach shrinks until that cut is below 1e-15 (``_unit_reach``).

When a prefix's estimate leaves the reach, the last prefix inside it becomes
the new reference (its C_ij summed afresh); a prefix too far even from that
one is fitted directly (``censored_log_location.fit_shape_and_scale``) and
becomes the reference. The first _DIRECT prefixes are fitted directly. Every
prefix agrees with its direct fit to about 1e-12 relative (the tests compare
them at 1e-10).

σ̂² = n gᵀ J⁻¹ g is taken in (A, B): at the maximum the observed information
transforms with the Jacobian, so gᵀ J⁻¹ g is the same in any coordinates.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import special

from . import censored_log_location as _log_location
from .gamma import censored as _gamma_censored
from .gamma.tail import log_density_term as gamma_log_density
from .gamma.tail import tail_probability_standard as gamma_tail
from .newton import damped_newton_step

__all__ = ["prefix_fits", "PrefixFits", "PREFIX_FITS", "GAMMA_LARGEST_SHAPE", "fits_every_prefix"]

_DEGREE = 12
_REACH = 0.25
_DIRECT = 48
_FIRST_CHUNK = 256
_LARGEST_CHUNK = 1 << 14
_STEP_TOLERANCE = 1e-14
_ITERATIONS = 60
_CELLS = 1 << 20
_PRECISION = 1e-15 * math.factorial(_DEGREE) / np.finfo(float).eps

# the terms A^i B^j of the series, i + j <= _DEGREE
_I, _J = (np.array(v) for v in zip(*[(i, k - i) for k in range(_DEGREE + 1) for i in range(k + 1)]))
_ORDER = _I + _J
_TERM = np.zeros((_DEGREE + 1, _DEGREE + 1), dtype=np.int64)
_TERM[_I, _J] = np.arange(_I.size)
_WEIGHT = np.array([1.0 / (math.factorial(i) * math.factorial(j)) for i, j in zip(_I, _J)])


# --------------------------------------------------------------------------- derivatives of the unit terms


def _extreme_value_failure(z):
    """T = log g = z - e^z and its derivatives 1 … _DEGREE, rows k = 0 … _DEGREE."""
    out = _extreme_value_suspension(z)
    out[0] += z
    out[1] += 1.0
    return out


def _extreme_value_suspension(z):
    """T = log Ḡ = -e^z: every derivative is -e^z."""
    with np.errstate(over="ignore"):
        return np.broadcast_to(-np.exp(z), (_DEGREE + 1, np.size(z))).copy()


def _normal_failure(z):
    """T = -z²/2 (the constant dropped): -z, -1, then zeros."""
    out = np.zeros((_DEGREE + 1, np.size(z)))
    out[0], out[1], out[2] = -0.5 * z * z, -z, -1.0
    return out


def _hazard_polynomials(order):
    """The k-th derivative of the normal hazard h = φ/Φ(-z) as {(i, j): c} in h^i v^j, v = h - z.

    h' = h v and v' = h v - 1, so d(h^i v^j)/dz = i h^i v^{j+1} + j h^{i+1} v^j - j h^i v^{j-1}.
    """
    polynomials = [{(1, 0): 1}]
    for _ in range(order):
        derivative = {}
        for (i, j), c in polynomials[-1].items():
            for key, factor in (((i, j + 1), i), ((i + 1, j), j), ((i, j - 1), -j)):
                if factor:
                    derivative[key] = derivative.get(key, 0) + c * factor
        polynomials.append({key: c for key, c in derivative.items() if c})
    return polynomials


_HAZARD = _hazard_polynomials(_DEGREE - 1)


def _normal_suspension(z):
    """T = log Φ(-z) and T^{(k)} = -h^{(k-1)} (h the normal hazard), from the polynomials in h and v."""
    z = np.asarray(z, dtype=float)
    log_survival = special.log_ndtr(-z)
    with np.errstate(over="ignore"):
        h = np.exp(-0.5 * z * z - 0.5 * math.log(2.0 * math.pi) - log_survival)
    return _from_hazard(log_survival, h, h - z, _HAZARD)


def _gamma_hazard_polynomials(shape, order):
    """The k-th derivative in z = log(t/s) of the hazard h of log X (gamma, shape a) as {(i, j): c} in h^i g^j.

    With g = a - e^z + h: h' = h g and g' = h g - h - a + g, so d(h^i g^j)/dz
    = i h^i g^{j+1} + j h^{i+1} g^j - j h^{i+1} g^{j-1} - j a h^i g^{j-1} + j h^i g^j.
    """
    polynomials = [{(1, 0): 1.0}]
    for _ in range(order):
        derivative = {}
        for (i, j), c in polynomials[-1].items():
            for key, factor in (((i, j + 1), i), ((i + 1, j), j), ((i + 1, j - 1), -j), ((i, j - 1), -j * shape),
                                ((i, j), j)):
                if factor:
                    derivative[key] = derivative.get(key, 0.0) + c * factor
        polynomials.append({key: c for key, c in derivative.items() if c})
    return polynomials


class _LogGamma:
    """log X - log s for a gamma lifetime of known shape a: a log-location family of width 1.

    Density g(z) = exp(a z - e^z)/Γ(a), survival Ḡ(z) = Q(a, e^z); so the
    known-shape gamma fits the expansion with A = 0 and z = log(t/s).
    """

    def __init__(self, shape):
        self.shape = float(shape)
        self.hazard = _gamma_hazard_polynomials(self.shape, _DEGREE - 1)

    def density_terms(self, z):
        with np.errstate(over="ignore"):
            return gamma_log_density(self.shape, np.exp(z)), None, None

    def survival_terms(self, z):
        with np.errstate(over="ignore"):
            return gamma_tail(self.shape, np.exp(z)).log_p, None, None

    def log_cdf(self, z):
        with np.errstate(over="ignore"):
            return gamma_tail(self.shape, np.exp(z)).log_cdf

    @staticmethod
    def width_from_shape(shape):
        return np.ones_like(np.asarray(shape, dtype=float))

    def magnitude(self, z):
        """h ≈ e^z far beyond the scale and the polynomials' coefficients grow with a."""
        with np.errstate(over="ignore"):
            return np.maximum(np.exp(z), self.shape)

    def failure(self, z):
        """T = log g = a z - e^z (the constant dropped): a - e^z, then -e^z."""
        out = _extreme_value_suspension(z)
        out[0] += self.shape * z
        out[1] += self.shape
        return out

    def suspension(self, z):
        """T = log Q(a, e^z) and T^{(k)} = -h^{(k-1)}, from the polynomials in h and g = a - e^z + h."""
        z = np.asarray(z, dtype=float)
        with np.errstate(over="ignore"):
            e = np.exp(z)
            log_survival = gamma_tail(self.shape, e).log_p
            h = np.exp(gamma_log_density(self.shape, e) - log_survival)
        g = self.shape - e + h
        return _from_hazard(log_survival, h, g, self.hazard)


def _from_hazard(log_survival, h, second, polynomials):
    """Rows T, T', …: T = log survival and T^{(k)} = -(polynomial k-1 in h and the second variable)."""
    degree = _DEGREE + 1
    h_powers = np.cumprod(np.vstack([np.ones_like(h)] + [h] * degree), axis=0)
    other_powers = np.cumprod(np.vstack([np.ones_like(h)] + [second] * degree), axis=0)
    out = np.empty((_DEGREE + 1, h.size))
    out[0] = log_survival
    for k, polynomial in enumerate(polynomials, start=1):
        out[k] = -sum(c * h_powers[i] * other_powers[j] for (i, j), c in polynomial.items())
    return out


@dataclass(frozen=True)
class _Terms:
    failure: Callable
    suspension: Callable
    exact_failures: bool  # the failure term is a polynomial within the degree: failures do not limit the reach
    magnitude: Callable = None  # (z) -> size of the suspension terms' derivatives that cancel when evaluated
    reach: float = _REACH  # the suspensions' largest |Δ| (their series converges within a few times it)


_TERMS = {"weibull": _Terms(_extreme_value_failure, _extreme_value_suspension, False),
          "lognormal": _Terms(_normal_failure, _normal_suspension, True, lambda z: np.abs(z))}

# What ``prefix_fits`` fits: (model, method).
PREFIX_FITS = {("weibull", "known-shape"), ("weibull", "fitted-shape"), ("lognormal", "known-shape"),
               ("lognormal", "fitted-shape"), ("gamma", "known-shape")}
# The largest gamma shape the series serves: the coefficients of the hazard's derivatives grow like a^k, and
# at shape 20 a prefix's σ̂² already agrees with its own fit only to about 5e-12 (1e-14 below shape 10).
GAMMA_LARGEST_SHAPE = 20.0


def fits_every_prefix(model, method, shape=None) -> bool:
    """True when ``prefix_fits`` serves this model and method (for the gamma: up to GAMMA_LARGEST_SHAPE)."""
    if (model, method) not in PREFIX_FITS:
        return False
    return model != "gamma" or float(shape) <= GAMMA_LARGEST_SHAPE


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class PrefixFits:
    """The censored ML of every prefix x[:n], n = 1 … N (NaN where none exists).

    Attributes
    ----------
    location, log_width : ndarray
        μ̂ and α̂ = log b̂ (Weibull: log η̂ and -log β̂; lognormal: log median and log σ̂).
    sigma2 : ndarray
        σ̂² = n gᵀ J⁻¹ g of the log-odds at the threshold.
    """

    location: np.ndarray
    log_width: np.ndarray
    sigma2: np.ndarray


def prefix_fits(model, times, suspended, threshold, method, shape=None, count=None) -> PrefixFits:
    """The censored ML and σ̂² of the first n units for every n = 1 … count (all units by default).

    Parameters
    ----------
    model : {'weibull', 'lognormal'}
    times : array_like
        Positive times in test order.
    suspended : array_like of bool
    threshold : float
    method : {'known-shape', 'fitted-shape'}
    shape : float, optional
        The known shape (known-shape).
    count : int, optional
        Only the first ``count`` prefixes.

    Notes
    -----
    Same estimates as ``censored_log_location.fit_known_shape`` /
    ``fit_shape_and_scale`` and σ̂² as its ``sigma2_*`` on each prefix alone,
    from one expansion point at a time (see the module docstring).
    """
    log_t = np.log(np.asarray(times, dtype=float).ravel())
    flags = np.asarray(suspended, dtype=bool).ravel()
    size = log_t.size if count is None else int(count)
    log_t, flags = log_t[:size], flags[:size]
    return _Prefixes(model, log_t, flags, threshold, method, shape).run()


class _Prefixes:
    def __init__(self, model, log_t, flags, threshold, method, shape):
        if not fits_every_prefix(model, method, shape):
            raise ValueError(f"prefix fits are for {sorted(PREFIX_FITS)}, the gamma up to shape "
                             f"{GAMMA_LARGEST_SHAPE:g} (got {model}, {method}, shape {shape})")
        self.gamma = model == "gamma"
        if self.gamma:
            self.family = _LogGamma(shape)
            self.terms = _Terms(self.family.failure, self.family.suspension, False, self.family.magnitude,
                                _REACH / math.sqrt(max(1.0, float(shape))))
        else:
            self.family = _log_location.FAMILIES[model]
            self.terms = _TERMS[model]
        self.log_t, self.flags = log_t, flags
        self.log_c = math.log(threshold)
        self.threshold = threshold
        self.known = method == "known-shape"
        self.shape = shape
        size = log_t.size
        self.failures = np.cumsum(~flags)
        self.needed = 1 if self.known else 2
        self.location = np.full(size, np.nan)
        self.log_width = np.full(size, np.nan)
        self.sigma2 = np.full(size, np.nan)
        self.limiting = flags if self.terms.exact_failures else np.ones(size, dtype=bool)

    # ---------------------------------------------------------------- direct fits

    def _direct(self, prefixes):
        """Fit the given prefixes each on its own (padded matrices, _CELLS at a time); True where one exists."""
        prefixes = np.asarray(prefixes)
        rows = max(1, _CELLS // max(1, int(prefixes.max())))
        for start in range(0, prefixes.size, rows):
            self._direct_block(prefixes[start:start + rows])
        return np.isfinite(self.location[prefixes - 1])

    def _direct_block(self, prefixes):
        width = int(prefixes.max())
        log_t, flags = self.log_t[:width], self.flags[:width]
        present = np.arange(width) < prefixes[:, None]
        failures = (np.broadcast_to(log_t, present.shape), (present & ~flags).astype(float))
        suspensions = (np.broadcast_to(log_t, present.shape), (present & flags).astype(float))
        fits = _log_location
        with np.errstate(all="ignore"):
            if self.gamma:
                self._direct_gamma(prefixes, present, log_t, flags)
                return
            if self.known:
                shape = np.full(prefixes.size, float(self.shape))
                location = fits.fit_known_shape(self.family, failures, suspensions, shape)
                log_width = np.log(self.family.width_from_shape(shape))
                sigma2 = fits.sigma2_known_shape(self.family, failures, suspensions, location, shape,
                                                 self.threshold, prefixes)
            else:
                location, log_width = fits.fit_shape_and_scale(self.family, failures, suspensions)
                ok = np.isfinite(location)
                sigma2 = fits.sigma2_fitted_shape(self.family, failures, suspensions, np.where(ok, location, 0.0),
                                                  np.where(ok, log_width, 0.0), self.threshold, prefixes)
                sigma2 = np.where(ok, sigma2, np.nan)
        self.location[prefixes - 1] = location
        self.log_width[prefixes - 1] = np.where(np.isfinite(location), log_width, np.nan)
        self.sigma2[prefixes - 1] = sigma2

    def _direct_gamma(self, prefixes, present, log_t, flags):
        """The known-shape gamma fit of each prefix on its own (``gamma.censored``), from per-unit rows."""
        failed = present & ~flags
        x = np.exp(log_t)
        failures = (failed.sum(axis=-1).astype(float), np.where(failed, x, 0.0).sum(axis=-1),
                    np.where(failed, log_t, 0.0).sum(axis=-1))
        suspensions = (np.broadcast_to(x, present.shape), (present & flags).astype(float))
        shape = np.full(prefixes.size, float(self.shape))
        log_scale = _gamma_censored.fit_known_shape(failures, suspensions, shape)
        sigma2 = _gamma_censored.sigma2_known_shape(failures, suspensions, shape, log_scale, self.threshold, prefixes)
        self.location[prefixes - 1] = log_scale
        self.log_width[prefixes - 1] = np.where(np.isfinite(log_scale), 0.0, np.nan)
        self.sigma2[prefixes - 1] = sigma2

    # ---------------------------------------------------------------- the expansion

    def _coefficients(self, start, end, mu0, alpha0):
        """Per unit in [start, end): its C_ij terms (rows) and (|z⁰|, 1) / its reach where it limits it (else 0)."""
        z0 = (self.log_t[start:end] - mu0) * math.exp(-alpha0)
        flags = self.flags[start:end]
        derivatives = np.empty((_DEGREE + 1, z0.size))
        derivatives[:, flags] = self.terms.suspension(z0[flags])
        derivatives[:, ~flags] = self.terms.failure(z0[~flags])
        z_powers = np.cumprod(np.vstack([np.ones_like(z0)] + [z0] * _DEGREE), axis=0)
        with np.errstate(invalid="ignore", over="ignore"):
            coefficients = derivatives[_ORDER] * z_powers[_I] * _WEIGHT[:, None]
        reach = np.where(flags, self.terms.reach, _REACH)
        if self.terms.magnitude is not None:
            reach[flags] = _unit_reach(self.terms.magnitude(z0[flags]), self.terms.reach)
        limiting = self.limiting[start:end]
        return coefficients, np.where(limiting, np.vstack([np.abs(z0), np.ones_like(z0)]) / reach, 0.0)

    def _solve(self, sums, failures, reach):
        """Newton in (A, B) for every column of sums; (A, B, Hessian, converged, inside the reach)."""
        columns = sums.shape[1]
        sums = _derivative_parts(sums)
        a, b = np.zeros(columns), np.zeros(columns)
        active = np.ones(columns, dtype=bool)
        converged = np.zeros(columns, dtype=bool)
        hessian = None
        for _ in range(_ITERATIONS):
            gradient, hessian = self._derivatives(sums, failures, a, b)
            if self.known:
                step_a = np.zeros(columns)
                step_b = -gradient[1] / hessian[2]
                step_b = np.clip(step_b, -_REACH, _REACH)
            else:
                with np.errstate(all="ignore"):
                    step_a, step_b = damped_newton_step(gradient, hessian, (_REACH, _REACH))
            step_a, step_b = np.where(active, step_a, 0.0), np.where(active, step_b, 0.0)
            a, b = a + step_a, b + step_b
            small = (np.abs(step_a) <= _STEP_TOLERANCE) & (np.abs(step_b) <= _STEP_TOLERANCE * (1.0 + np.abs(b)))
            converged |= active & small
            active &= ~small & np.isfinite(a + b)
            if not active.any():
                break
        gradient, hessian = self._derivatives(sums, failures, a, b)
        inside = np.abs(a) * reach[0] + np.abs(b) * reach[1] <= 1.0
        return a, b, hessian, converged & np.isfinite(a + b), inside

    def _derivatives(self, parts, failures, a, b):
        """(ℓ_A, ℓ_B), (ℓ_AA, ℓ_AB, ℓ_BB) of the series plus r log(1 + A), from ``_derivative_parts``."""
        with np.errstate(all="ignore"):
            a_powers = np.cumprod(np.vstack([np.ones_like(a)] + [a] * _DEGREE), axis=0)
            b_powers = np.cumprod(np.vstack([np.ones_like(b)] + [b] * _DEGREE), axis=0)
            monomials = a_powers[_I] * b_powers[_J]
            g_a, g_b, h_aa, h_ab, h_bb = (np.einsum("tc,tc->c", part, monomials) for part in parts)
            one_plus = 1.0 + a
            g_a = g_a + failures / one_plus
            h_aa = h_aa - failures / one_plus ** 2
        return (g_a, g_b), (h_aa, h_ab, h_bb)

    def _store(self, prefixes, a, b, hessian, mu0, alpha0, failures):
        """Convert (A, B) back to (μ, α), and σ̂² from the Hessian in (A, B)."""
        width0 = math.exp(alpha0)
        log_width = alpha0 - np.log1p(a)
        location = mu0 - b * width0 / (1.0 + a)
        z_c0 = (self.log_c - mu0) / width0
        z_c = z_c0 * (1.0 + a) + b
        family = self.family
        log_density, _, _ = family.density_terms(z_c)
        log_survival, _, _ = family.survival_terms(z_c)
        with np.errstate(all="ignore"):
            slope = np.exp(log_density - log_survival - family.log_cdf(z_c))  # -∂ log q / ∂z_c
            h_aa, h_ab, h_bb = hessian
            if self.known:
                sigma2 = prefixes * slope * slope / -h_bb
            else:
                g_a, g_b = slope * z_c0, slope
                determinant = h_aa * h_bb - h_ab * h_ab
                sigma2 = -prefixes * (g_a * g_a * h_bb - 2 * g_a * g_b * h_ab + g_b * g_b * h_aa) / determinant
        enough = failures >= self.needed
        self.location[prefixes - 1] = np.where(enough, location, np.nan)
        self.log_width[prefixes - 1] = np.where(enough, log_width, np.nan)
        self.sigma2[prefixes - 1] = np.where(enough, sigma2, np.nan)

    def run(self) -> PrefixFits:
        size = self.log_t.size
        enough = np.flatnonzero(self.failures >= self.needed)
        if enough.size == 0:
            return PrefixFits(self.location, self.log_width, self.sigma2)
        row = int(enough[0])  # prefixes 1 … row are done (no estimate before enough failures)
        # the first prefixes with enough failures, and every prefix until one has an estimate, directly
        while row < size:
            end = min(size, max(row + _DIRECT, 2 * row))
            found = self._direct(np.arange(row + 1, end + 1))
            row = end
            if found.any():
                break
        if row >= size:
            return PrefixFits(self.location, self.log_width, self.sigma2)
        last = int(np.flatnonzero(np.isfinite(self.location[:row]))[-1])
        mu0, alpha0 = self._reference(last)
        fresh, chunk = True, _FIRST_CHUNK
        while row < size:
            if fresh:
                carried, reach = self._coefficients(0, row, mu0, alpha0)
                carried, reach_carried = carried.sum(axis=1), (reach.max(axis=1) if reach.size else np.zeros(2))
                fresh = False
            end = min(size, row + chunk)
            coefficients, reach = self._coefficients(row, end, mu0, alpha0)
            sums = np.cumsum(coefficients, axis=1) + carried[:, None]
            reach = np.maximum.accumulate(np.maximum(reach, reach_carried[:, None]), axis=1)
            failures = self.failures[row:end].astype(float)
            a, b, hessian, converged, inside = self._solve(sums, failures, reach)
            good = converged & inside
            accepted = int(np.argmin(good)) if not good.all() else end - row
            prefixes = np.arange(row + 1, row + accepted + 1)
            if accepted:
                self._store(prefixes, a[:accepted], b[:accepted], tuple(h[:accepted] for h in hessian),
                            mu0, alpha0, failures[:accepted])
            if accepted == end - row:
                carried, reach_carried = sums[:, -1].copy(), reach[:, -1]
                row = end
                chunk = min(2 * chunk, _LARGEST_CHUNK)
                continue
            if accepted == 0:  # too far even from the previous prefix: this one directly
                self._direct(np.array([row + 1]))
                if np.isfinite(self.location[row]):
                    mu0, alpha0 = self.location[row], self.log_width[row]
                row += 1
            else:
                row += accepted
                mu0, alpha0 = self.location[row - 1], self.log_width[row - 1]
            fresh, chunk = True, _FIRST_CHUNK
        return PrefixFits(self.location, self.log_width, self.sigma2)

    def _reference(self, index):
        return float(self.location[index]), float(self.log_width[index])


def _unit_reach(magnitude, largest):
    """The |Δ| up to which a unit's series is used when its derivatives come from terms of size magnitude^k.

    Evaluating the k-th derivative from such terms costs about ε magnitude^{k+1} to rounding; the cut
    series term then stays below 1e-15 where magnitude^{K+1} |Δ|^K / K! <= 1e-15 / ε. At most ``largest``.
    """
    with np.errstate(over="ignore", divide="ignore"):
        limit = (_PRECISION / np.maximum(magnitude, 1.0) ** (_DEGREE + 1)) ** (1.0 / _DEGREE)
    return np.minimum(largest, limit)


def _derivative_parts(sums):
    """The series' coefficients of ∂/∂A, ∂/∂B, ∂²/∂A², ∂²/∂A∂B, ∂²/∂B², each aligned with the monomials A^i B^j."""
    parts = []
    for di, dj in ((1, 0), (0, 1), (2, 0), (1, 1), (0, 2)):
        factor = _falling(_I, di) * _falling(_J, dj)
        keep = np.flatnonzero(factor)
        part = np.zeros_like(sums)
        part[_TERM[_I[keep] - di, _J[keep] - dj]] = sums[keep] * factor[keep, None]
        parts.append(part)
    return parts


def _falling(values, order):
    """values (values - 1) … (values - order + 1): the factor of differentiating x^values order times."""
    out = np.ones(values.shape, dtype=float)
    for step in range(order):
        out *= values - step
    return out
