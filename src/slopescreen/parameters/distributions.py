"""Distributions of a soil parameter: :class:`Parameter` and its constructors.

A :class:`Parameter` is one of

* ``fixed(value)``;
* ``uniform(low, high)``;
* ``normal(mean, sd)``;
* ``lognormal(median, sd_log)`` (the natural logarithm is normal with mean
  ``ln(median)`` and standard deviation ``sd_log``);

each optionally truncated to bounds ``[low, high]`` with
:meth:`Parameter.truncated`. A truncated distribution is the original one
conditioned on lying inside the bounds (its density is renormalised, nothing is
piled up at a bound). A normal distribution that can leave the physical range
of its quantity (a negative depth or cohesion, a friction angle above 60
degrees) is always truncated to that range before sampling: see
:data:`slopescreen.parameters.PHYSICAL_RANGE`, applied by
:func:`slopescreen.probability.encode_table`.

:meth:`Parameter.encode` packs a parameter into the float64 row
``[kind_code, a, b, low, high]`` that the numba kernels read; they sample it by
inverse transform (:mod:`slopescreen._kernels.inverse_cdf`) from a
counter-based generator (:mod:`slopescreen._kernels.counter_rng`).
"""

import dataclasses
import math

import numpy as np

from ..errors import InputError


KIND_CODES = {"fixed": 0, "uniform": 1, "normal": 2, "lognormal": 3}
"""Code of each distribution kind in column 0 of an encoded row."""

_KIND_NAMES = {v: k for k, v in KIND_CODES.items()}


# smallest probability mass a truncated distribution may keep inside its bounds
_MIN_MASS = 1e-12


def _num(value, name, what):
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name}: {what} must be a number, got {value!r}") from None
    return v


def _mass(zl, zh):
    """Standard normal probability of [zl, zh], accurate in either tail."""
    from scipy import special  # only here: importing scipy.special costs 0.3 s at start-up

    if zl > 0.0:
        return float(special.ndtr(-zl) - special.ndtr(-zh))
    return float(special.ndtr(zh) - special.ndtr(zl))


@dataclasses.dataclass(frozen=True)
class Parameter:
    """A soil parameter: a fixed value or a (truncated) distribution.

    Build one with :func:`fixed`, :func:`uniform`, :func:`normal` or
    :func:`lognormal` rather than directly.

    Parameters
    ----------
    kind : {"fixed", "uniform", "normal", "lognormal"}
    a, b : float
        fixed: (value, 0); uniform: (low, high); normal: (mean, sd);
        lognormal: (median, sd of the natural log). Units are those of the
        quantity (e.g. kPa for cohesion), except ``sd_log`` (dimensionless).
    low, high : float
        Truncation bounds in the unit of the quantity (default: none).
    name : str
        Name used in error messages (e.g. ``"friction_deg"``).

    Raises
    ------
    InputError
        Unknown kind, non-finite value, uniform low > high, sd < 0,
        lognormal median <= 0, low > high, or bounds that keep less than
        1e-12 of the distribution.

    Notes
    -----
    ``central()`` is the median of the truncated distribution and is what the
    deterministic maps use; ``mean()`` and ``sd()`` are the moments of the
    truncated distribution (they feed FOSM).

    Examples
    --------
    >>> phi = normal(34.0, 2.0, name="friction_deg").truncated(0.0, 60.0)
    >>> round(phi.central(), 6)
    34.0
    """

    kind: str
    a: float
    b: float = 0.0
    low: float = -math.inf
    high: float = math.inf
    name: str = dataclasses.field(default="parameter", compare=False)

    def __post_init__(self):
        name = self.name
        if self.kind not in KIND_CODES:
            raise InputError(
                f"{name}: unknown distribution {self.kind!r}; expected one of "
                f"{', '.join(KIND_CODES)}"
            )
        a = _num(self.a, name, "the first value")
        b = _num(self.b, name, "the second value")
        low = _num(self.low, name, "the lower bound")
        high = _num(self.high, name, "the upper bound")
        for label, v in (("value", a), ("second value", b)):
            if not math.isfinite(v):
                raise InputError(f"{name}: {label} must be finite, got {v!r}")
        if math.isnan(low) or math.isnan(high):
            raise InputError(f"{name}: truncation bounds must not be NaN")
        if low > high:
            raise InputError(
                f"{name}: truncation bounds [{low}, {high}] have low > high; swap them"
            )
        object.__setattr__(self, "a", a)
        object.__setattr__(self, "b", b)
        object.__setattr__(self, "low", low)
        object.__setattr__(self, "high", high)
        kind = self.kind
        if kind == "fixed":
            if b != 0.0:
                raise InputError(f"{name}: a fixed value takes one number, got a second ({b})")
            if not low <= a <= high:
                raise InputError(f"{name}: fixed value {a} lies outside [{low}, {high}]")
        elif kind == "uniform":
            if a > b:
                raise InputError(
                    f"{name}: uniform low {a} > high {b}; give [low, high] with low <= high"
                )
            lo, hi = max(a, low), min(b, high)
            if lo > hi or (lo == hi and a < b):
                raise InputError(
                    f"{name}: bounds [{low}, {high}] exclude the whole uniform [{a}, {b}]"
                )
        else:
            if b < 0.0:
                label = "sd" if kind == "normal" else "sd of the log"
                raise InputError(f"{name}: {kind} {label} must be >= 0, got {b}")
            if kind == "lognormal" and a <= 0.0:
                raise InputError(f"{name}: lognormal median must be > 0, got {a}")
            loc, zl, zh = self._standard_bounds()
            if b == 0.0:
                if not low <= a <= high:
                    raise InputError(
                        f"{name}: {kind} with sd 0 at {a} lies outside [{low}, {high}]"
                    )
            elif _mass(zl, zh) < _MIN_MASS:
                raise InputError(
                    f"{name}: bounds [{low}, {high}] exclude practically all of the "
                    f"{kind} distribution ({a}, {b}); widen them"
                )

    # -- helpers --------------------------------------------------------
    def _standard_bounds(self):
        """Location and standardised bounds of the underlying normal."""
        if self.kind == "normal":
            loc, sd, lo, hi = self.a, self.b, self.low, self.high
        else:  # lognormal: work on the log
            loc, sd = math.log(self.a), self.b
            lo = math.log(self.low) if self.low > 0.0 else -math.inf
            hi = math.log(self.high) if self.high > 0.0 else -math.inf
        if sd == 0.0:
            return loc, -math.inf, math.inf
        return loc, (lo - loc) / sd, (hi - loc) / sd

    def _truncnorm(self):
        loc, zl, zh = self._standard_bounds()
        from scipy import stats  # only here: importing scipy.stats costs 50 MB and 0.5 s

        return stats.truncnorm(zl, zh, loc=loc, scale=self.b)

    # -- public API -----------------------------------------------------
    @property
    def is_fixed(self):
        """True when every draw gives the same value."""
        if self.kind == "fixed":
            return True
        if self.kind == "uniform":
            return max(self.a, self.low) == min(self.b, self.high)
        return self.b == 0.0

    def truncated(self, low, high):
        """Return a copy truncated to ``[low, high]`` (replaces earlier bounds).

        Raises
        ------
        InputError
            If the bounds are reversed or exclude the distribution.
        """
        return dataclasses.replace(self, low=low, high=high)

    def central(self):
        """Median of the truncated distribution (used for deterministic maps)."""
        if self.kind == "fixed":
            return self.a
        if self.kind == "uniform":
            return 0.5 * (max(self.a, self.low) + min(self.b, self.high))
        if self.b == 0.0:
            return self.a
        m = float(self._truncnorm().median())
        return m if self.kind == "normal" else math.exp(m)

    def mean(self):
        """Mean of the truncated distribution."""
        if self.kind == "fixed":
            return self.a
        if self.kind == "uniform":
            return 0.5 * (max(self.a, self.low) + min(self.b, self.high))
        if self.b == 0.0:
            return self.a
        if self.kind == "normal":
            return float(self._truncnorm().mean())
        return self._lognormal_moment(1.0)

    def sd(self):
        """Standard deviation of the truncated distribution."""
        if self.is_fixed:
            return 0.0
        if self.kind == "uniform":
            return (min(self.b, self.high) - max(self.a, self.low)) / math.sqrt(12.0)
        if self.kind == "normal":
            return float(self._truncnorm().std())
        m1 = self._lognormal_moment(1.0)
        m2 = self._lognormal_moment(2.0)
        return math.sqrt(max(m2 - m1 * m1, 0.0))

    def _lognormal_moment(self, k):
        # E[exp(kX)] for X ~ N(mu, s^2) truncated to [zl, zh] (standardised):
        # exp(k mu + k^2 s^2 / 2) * P(zl - k s < Z < zh - k s) / P(zl < Z < zh)
        mu, zl, zh = self._standard_bounds()
        s = self.b
        ratio = _mass(zl - k * s, zh - k * s) / _mass(zl, zh)
        return math.exp(k * mu + 0.5 * k * k * s * s) * ratio

    def encode(self):
        """Return ``[kind_code, a, b, low, high]`` as float64 for numba kernels."""
        return np.array(
            [KIND_CODES[self.kind], self.a, self.b, self.low, self.high], dtype=np.float64
        )

    @classmethod
    def decode(cls, row, *, name="parameter"):
        """Inverse of :meth:`encode` (validates the row)."""
        row = np.asarray(row, dtype=np.float64)
        if row.shape != (5,):
            raise InputError(f"{name}: an encoded parameter has 5 numbers, got shape {row.shape}")
        code = int(row[0]) if np.isfinite(row[0]) else -1
        if code not in _KIND_NAMES or row[0] != code:
            raise InputError(f"{name}: unknown distribution code {row[0]!r}")
        return cls(_KIND_NAMES[code], row[1], row[2], row[3], row[4], name=name)


def fixed(value, *, name="parameter"):
    """A fixed value (unit of the quantity).

    Examples
    --------
    >>> fixed(18.5).central()
    18.5
    """
    return Parameter("fixed", value, 0.0, name=name)


def uniform(low, high, *, name="parameter"):
    """Uniform distribution on ``[low, high]``.

    Raises
    ------
    InputError
        If ``low > high`` (the message names ``name``).

    Examples
    --------
    >>> round(uniform(0.8, 1.6).mean(), 12)
    1.2
    """
    return Parameter("uniform", low, high, name=name)


def normal(mean, sd, *, name="parameter"):
    """Normal distribution; truncate it with ``.truncated(low, high)``.

    A normal that could leave the physical range of its quantity is truncated
    to that range (:data:`slopescreen.parameters.PHYSICAL_RANGE`) before it is sampled.

    Examples
    --------
    >>> normal(34.0, 2.0).sd()
    2.0
    """
    return Parameter("normal", mean, sd, name=name)


def lognormal(median, sd_log, *, name="parameter"):
    """Lognormal distribution given its median and the sd of its natural log.

    Examples
    --------
    >>> round(lognormal(2.0, 0.0).central(), 12)
    2.0
    """
    return Parameter("lognormal", median, sd_log, name=name)
