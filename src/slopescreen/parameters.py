"""Soil parameters: a fixed value or a probability distribution.

A :class:`Parameter` is one of

* ``fixed(value)``;
* ``uniform(low, high)``;
* ``normal(mean, sd)``;
* ``lognormal(median, sd_log)`` (the natural logarithm is normal with mean
  ``ln(median)`` and standard deviation ``sd_log``);

each optionally truncated to physical bounds ``[low, high]`` with
:meth:`Parameter.truncated`. A truncated distribution is the original one
conditioned on lying inside the bounds (its density is renormalised, nothing is
piled up at a bound). A normal distribution that can leave the physical range
of its quantity (a negative depth or cohesion, a friction angle above 60
degrees) is always truncated to that range before sampling: see
:data:`PHYSICAL_RANGE`, applied by ``probability.encode_table``.

Numba kernels receive a parameter as the float64 row of :meth:`Parameter.encode`
``[kind_code, a, b, low, high]``. :func:`_prepare` turns it into a row holding
what the inverse-CDF sampler :func:`_quantile` needs, and :func:`_draw` maps a
64-bit counter key to one value. The random numbers come from a counter-based
generator: the splitmix64 finaliser applied to a key built from (seed, cell or
soil-unit index, sample index, parameter index). A draw therefore depends only
on those four integers, never on the order in which threads run, so Monte Carlo
results are reproducible bit for bit.
"""

import dataclasses
import math

import numpy as np
from scipy import special, stats

from ._numba import njit
from .errors import InputError

__all__ = [
    "Parameter",
    "fixed",
    "uniform",
    "normal",
    "lognormal",
    "KIND_CODES",
    "PHYSICAL_RANGE",
]

KIND_CODES = {"fixed": 0, "uniform": 1, "normal": 2, "lognormal": 3}
"""Code of each distribution kind in column 0 of an encoded row."""

_KIND_NAMES = {v: k for k, v in KIND_CODES.items()}

PHYSICAL_RANGE = {
    "depth_m": (0.0, math.inf),
    "cohesion_kpa": (0.0, math.inf),
    "root_cohesion_kpa": (0.0, math.inf),
    "friction_deg": (0.0, 60.0),
    "unit_weight_kn_m3": (0.0, 30.0),
    "conductivity_m_per_day": (0.0, math.inf),
    "diffusivity_m2_per_s": (0.0, math.inf),
}
"""Physical range [low, high] of each soil parameter, in its own unit.

Depth, conductivity, diffusivity and unit weight must be > 0 (the lower bound
is open); cohesions may be 0. Distributions are truncated to these ranges.
"""

_OPEN_LOW = {"depth_m", "unit_weight_kn_m3", "conductivity_m_per_day", "diffusivity_m2_per_s"}

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
    to that range (:data:`PHYSICAL_RANGE`) before it is sampled.

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


def _physical(param, key):
    """Intersect a parameter's bounds with :data:`PHYSICAL_RANGE` ``[key]``.

    Raises
    ------
    InputError
        When the (fixed) value or the whole distribution lies outside the range.
    """
    lo, hi = PHYSICAL_RANGE[key]
    name = param.name
    if param.kind == "fixed":
        v = param.a
        if v < lo or v > hi or (key in _OPEN_LOW and v <= lo):
            rel = ">" if key in _OPEN_LOW else ">="
            raise InputError(
                f"{name}: {v} is outside the physical range ({rel} {lo}, <= {hi})"
            )
        return param
    new_lo, new_hi = max(param.low, lo), min(param.high, hi)
    try:
        if new_lo > new_hi:
            raise InputError("empty")
        return param.truncated(new_lo, new_hi)
    except InputError:
        raise InputError(
            f"{name}: the {param.kind} distribution ({param.a}, {param.b}) within bounds "
            f"[{param.low}, {param.high}] lies outside the physical range [{lo}, {hi}]"
        ) from None


# ---------------------------------------------------------------------------
# numba: normal CDF and its inverse
# ---------------------------------------------------------------------------

_INV_SQRT2 = 0.7071067811865476


@njit
def _ndtr(x):
    """Standard normal CDF, Phi(x) = erfc(-x / sqrt 2) / 2."""
    return 0.5 * math.erfc(-x * _INV_SQRT2)


@njit
def _ndtri_central(q):
    """AS 241 quantile for |q| = |p - 0.5| <= 0.425 (no branch: vectorisable)."""
    r = 0.180625 - q * q
    num = (((((((2.5090809287301226727e3 * r + 3.3430575583588128105e4) * r
                + 6.7265770927008700853e4) * r + 4.5921953931549871457e4) * r
              + 1.3731693765509461125e4) * r + 1.9715909503065514427e3) * r
            + 1.3314166789178437745e2) * r + 3.3871328727963666080e0)
    den = (((((((5.2264952788528545610e3 * r + 2.8729085735721942674e4) * r
                + 3.9307895800092710610e4) * r + 2.1213794301586595867e4) * r
              + 5.3941960214247511077e3) * r + 6.8718700749205790830e2) * r
            + 4.2313330701600911252e1) * r + 1.0)
    # np.true_divide: IEEE division without numba's zero-divisor check, so
    # loops over blocks of samples vectorise (den >= 1 here in any case)
    return np.true_divide(q * num, den)


@njit
def _ndtri_tail(p, q):
    """AS 241 quantile for |q| = |p - 0.5| > 0.425 (0 < p < 1)."""
    r = p if q < 0.0 else 1.0 - p
    r = math.sqrt(-math.log(r))
    if r <= 5.0:
        r -= 1.6
        num = (((((((7.74545014278341407640e-4 * r + 2.27238449892691845833e-2) * r
                    + 2.41780725177450611770e-1) * r + 1.27045825245236838258e0) * r
                  + 3.64784832476320460504e0) * r + 5.76949722146069140550e0) * r
                + 4.63033784615654529590e0) * r + 1.42343711074968357734e0)
        den = (((((((1.05075007164441684324e-9 * r + 5.47593808499534494600e-4) * r
                    + 1.51986665636164571966e-2) * r + 1.48103976427480074590e-1) * r
                  + 6.89767334985100004550e-1) * r + 1.67638483018380384940e0) * r
                + 2.05319162663775882187e0) * r + 1.0)
    else:
        r -= 5.0
        num = (((((((2.01033439929228813265e-7 * r + 2.71155556874348757815e-5) * r
                    + 1.24266094738807843860e-3) * r + 2.65321895265761230930e-2) * r
                  + 2.96560571828504891230e-1) * r + 1.78482653991729133580e0) * r
                + 5.46378491116411436990e0) * r + 6.65790464350110377720e0)
        den = (((((((2.04426310338993978564e-15 * r + 1.42151175831644588870e-7) * r
                    + 1.84631831751005468180e-5) * r + 7.86869131145613259100e-4) * r
                  + 1.48753612908506148525e-2) * r + 1.36929880922735805310e-1) * r
                + 5.99832206555887937690e-1) * r + 1.0)
    z = num / den
    return -z if q < 0.0 else z


@njit
def _ndtri(p):
    """Standard normal quantile by Wichura's algorithm AS 241 (PPND16).

    Relative accuracy about 1e-16 for 0 < p < 1 (checked against
    scipy.special.ndtri to 4e-15 in the tests), so no Newton refinement step
    is needed; returns -inf at 0 and +inf at 1.
    Wichura, M.J. (1988). Algorithm AS 241: The percentage points of the
    normal distribution. Applied Statistics 37(3), 477-484 (DOI 10.2307/2347330
    from memory).
    """
    if not p > 0.0:
        return -math.inf if p == 0.0 else math.nan
    if not p < 1.0:
        return math.inf if p == 1.0 else math.nan
    q = p - 0.5
    if abs(q) <= 0.425:
        return _ndtri_central(q)
    return _ndtri_tail(p, q)


# ---------------------------------------------------------------------------
# numba: counter-based random numbers
# ---------------------------------------------------------------------------

_GOLDEN = np.uint64(0x9E3779B97F4A7C15)
_STREAM = np.uint64(0xD1B54A32D192ED03)
_MIX1 = np.uint64(0xBF58476D1CE4E5B9)
_MIX2 = np.uint64(0x94D049BB133111EB)
_SEED_DOMAIN = np.uint64(0x5EED0F5107E5C2E5)
_S30 = np.uint64(30)
_S27 = np.uint64(27)
_S31 = np.uint64(31)
_S12 = np.uint64(12)
_TWO_M52 = 1.0 / 4503599627370496.0


@njit
def _mix64(z):
    """splitmix64 finaliser: a bijective 64-bit mixer.

    Steele, G.L., Lea, D., Flood, C.H. (2014). Fast splittable pseudorandom
    number generators. Proc. OOPSLA 2014, 453-472 (details from memory).
    """
    z = (z ^ (z >> _S30)) * _MIX1
    z = (z ^ (z >> _S27)) * _MIX2
    return z ^ (z >> _S31)


@njit
def _seed_key(seed):
    """Key of a run from a non-negative integer seed (uint64)."""
    return _mix64(np.uint64(seed) ^ _SEED_DOMAIN)


@njit
def _stream_key(seed_key, stream):
    """Key of one stream (a cell or a soil unit) of a run."""
    return _mix64(seed_key + np.uint64(stream + 1) * _STREAM)


@njit
def _counter_key(stream_key, counter):
    """Key of draw number ``counter`` (>= 0) of a stream."""
    return _mix64(stream_key + np.uint64(counter + 1) * _GOLDEN)


@njit
def _uniform01(key):
    """Map a 64-bit key to a uniform number strictly inside (0, 1).

    The top 52 bits k give (k + 1/2) / 2^52, in [2^-53, 1 - 2^-53]: both ends
    are exact doubles (with 53 bits, (2^53 - 1/2) / 2^53 would round to 1).
    """
    return (np.float64(key >> _S12) + 0.5) * _TWO_M52


# ---------------------------------------------------------------------------
# numba: sampling a parameter by inverse transform
# ---------------------------------------------------------------------------

PREPARED_WIDTH = 8
"""Length of a row made by :func:`_prepare`."""


@njit
def _prepare_into(code, out):
    """Fill ``out[0:8]`` from an encoded row ``[kind, a, b, low, high]``.

    out = [kind, loc, scale, p_low, p_width, sign, low, high] where for the
    normal kinds ``sign * ndtri(p_low + u * p_width)`` is the standard normal
    quantile at u of the truncated interval: an interval in the upper tail is
    mirrored to the lower tail (sign -1, p_width < 0) so that its
    probabilities keep full relative precision. Degenerate distributions
    become kind 0.
    """
    kind = int(code[0])
    a = code[1]
    b = code[2]
    low = code[3]
    high = code[4]
    out[0] = kind
    out[1] = a
    out[2] = 0.0
    out[3] = 0.0
    out[4] = 1.0
    out[5] = 1.0
    out[6] = low
    out[7] = high
    if kind == 1:
        lo = max(a, low)
        hi = min(b, high)
        out[1] = lo
        out[2] = hi - lo
        if hi == lo:
            out[0] = 0.0
    elif kind == 2 or kind == 3:
        if b == 0.0:
            out[0] = 0.0
            return
        if kind == 2:
            loc = a
            lo = low
            hi = high
        else:
            loc = math.log(a)
            lo = math.log(low) if low > 0.0 else -math.inf
            hi = math.log(high) if high > 0.0 else -math.inf
        zl = (lo - loc) / b
        zh = (hi - loc) / b
        out[1] = loc
        out[2] = b
        if zl > 0.0:
            # upper tail: p = Phi(-zl) - u (Phi(-zl) - Phi(-zh)), x = loc - b ndtri(p),
            # still increasing in u
            p_top = _ndtr(-zl)
            out[3] = p_top
            out[4] = _ndtr(-zh) - p_top
            out[5] = -1.0
        else:
            p_low = _ndtr(zl)
            out[3] = p_low
            out[4] = _ndtr(zh) - p_low


@njit
def _prepare(code):
    """Return the prepared row (float64[8]) of an encoded row."""
    out = np.empty(PREPARED_WIDTH, dtype=np.float64)
    _prepare_into(code, out)
    return out


@njit
def _quantile_at(prep, unit, par, u):
    """Quantile at probability ``u`` in (0, 1) of row ``prep[unit, par]``.

    Reads the prepared table in place: kernels call this in their inner loop
    rather than slicing a row, which would touch the array's reference count.
    """
    kind = prep[unit, par, 0]
    if kind == 0.0:
        return prep[unit, par, 1]
    if kind == 1.0:
        x = prep[unit, par, 1] + u * prep[unit, par, 2]
    else:
        z = prep[unit, par, 5] * _ndtri(prep[unit, par, 3] + u * prep[unit, par, 4])
        x = prep[unit, par, 1] + prep[unit, par, 2] * z
        if kind == 3.0:
            x = math.exp(x)
    # rounding can step a hair outside the truncation interval
    if x < prep[unit, par, 6]:
        x = prep[unit, par, 6]
    elif x > prep[unit, par, 7]:
        x = prep[unit, par, 7]
    return x


@njit
def _quantile_block(prep, unit, par, u, out, row, nb):
    """``out[0, row, j] = _quantile_at(prep, unit, par, u[j])`` for j < nb, bit for bit.

    The same arithmetic as :func:`_quantile_at`, arranged in branch-free loops
    over a block of samples so that the compiler can vectorise them; only the
    normal tails (|p - 0.5| > 0.425) and the lognormal exponential run lane by lane.
    """
    kind = prep[unit, par, 0]
    loc = prep[unit, par, 1]
    scale = prep[unit, par, 2]
    low = prep[unit, par, 6]
    high = prep[unit, par, 7]
    if kind == 0.0:
        for j in range(nb):
            out[0, row, j] = loc
        return
    if kind == 1.0:
        for j in range(nb):
            out[0, row, j] = loc + u[j] * scale
    else:
        p_low = prep[unit, par, 3]
        p_width = prep[unit, par, 4]
        sign = prep[unit, par, 5]
        for j in range(nb):
            out[0, row, j] = _ndtri_central(p_low + u[j] * p_width - 0.5)
        for j in range(nb):
            p = p_low + u[j] * p_width
            q = p - 0.5
            if not abs(q) <= 0.425:
                out[0, row, j] = _ndtri(p)
        for j in range(nb):
            out[0, row, j] = loc + scale * (sign * out[0, row, j])
        if kind == 3.0:
            for j in range(nb):
                out[0, row, j] = math.exp(out[0, row, j])
    for j in range(nb):
        x = out[0, row, j]
        x = low if x < low else x
        out[0, row, j] = high if x > high else x


@njit
def _quantile(prep_row, u):
    """Quantile of one prepared parameter row at probability ``u`` in (0, 1)."""
    return _quantile_at(prep_row.reshape((1, 1, PREPARED_WIDTH)), 0, 0, u)


@njit
def _draw(code_row, key):
    """Draw one value of an encoded parameter for a 64-bit counter key.

    Slow path (prepares the row on every call); kernels prepare once and call
    :func:`_quantile` with :func:`_uniform01`.
    """
    return _quantile(_prepare(code_row), _uniform01(key))


# ---------------------------------------------------------------------------
# validation of physical inputs given as numbers or arrays
# ---------------------------------------------------------------------------


@njit
def _scan_kernel(values):
    """One pass over the values: (min, max) of the finite ones, NaN count, infinity count."""
    vmin = math.inf
    vmax = -math.inf
    n_nan = 0
    n_inf = 0
    for i in range(values.size):
        v = values[i]
        if math.isnan(v):
            n_nan += 1
        elif math.isinf(v):
            n_inf += 1
        else:
            vmin = min(vmin, v)
            vmax = max(vmax, v)
    return float(vmin), float(vmax), n_nan, n_inf


def _field(value, name, low, high, *, open_low=False, open_high=False, allow_nan=True):
    """Validate a number or array of a physical quantity; return an ndarray.

    float32 input stays float32; anything else becomes float64. NaN marks
    nodata (when ``allow_nan``); infinities, values outside the range and
    all-NaN input raise :class:`InputError` naming ``name``.
    """
    try:
        arr = np.asarray(value)
        if arr.dtype != np.float32:
            arr = arr.astype(np.float64)
    except (TypeError, ValueError):
        raise InputError(
            f"{name}: expected a number or an array of numbers, got {value!r}"
        ) from None
    if arr.size == 0:
        raise InputError(f"{name}: empty array")
    vmin, vmax, n_nan, n_inf = _scan_kernel(arr.reshape(-1))
    if n_inf:
        raise InputError(f"{name}: holds infinite values; use NaN for nodata")
    if n_nan == arr.size:
        raise InputError(f"{name}: every value is NaN (nodata); nothing to compute")
    if n_nan and not allow_nan:
        raise InputError(f"{name}: NaN is not accepted here")
    bad_low = vmin <= low if open_low else vmin < low
    bad_high = vmax >= high if open_high else vmax > high
    if bad_low or bad_high:
        lo_txt = f"> {low}" if open_low else f">= {low}"
        hi_txt = f"< {high}" if open_high else f"<= {high}"
        got = vmin if bad_low else vmax
        raise InputError(f"{name}: got {got}; expected values {lo_txt} and {hi_txt}")
    return arr


def _physical_field(value, key, *, name=None):
    """:func:`_field` with the range of :data:`PHYSICAL_RANGE` ``[key]``."""
    lo, hi = PHYSICAL_RANGE[key]
    return _field(value, name or key, lo, hi, open_low=key in _OPEN_LOW)
