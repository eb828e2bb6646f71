"""The data of the report's pan-and-zoom map: decimated, quantised copies of the products.

The report's interactive map (``templates/explorer.html.j2`` and the script
``templates/explorer.js``) draws the mapped products of a run over a
hillshade and, on a click, shows the values at that cell. Its values come
from compact copies embedded in the page, made here:

* **Decimation.** A grid of up to :data:`MAX_CELLS` cells is embedded at full
  resolution. A larger one is reduced by blocks of ``k x k`` cells, with the
  smallest ``k`` (:func:`block_factor`) that brings it within the limit: each
  block takes the **worst** value of a hazard product (the least FS, cluster
  FS bound and critical recharge; the largest probability of failure and
  runout count; the worst critical-recharge class) so that a failing cell is
  never averaged away, and the **mean** of the valid cells of the
  descriptive products (slope, wetness, specific catchment area); soil units
  take the most common unit of the block (:data:`RULES`). The full detail
  stays in the GeoTIFF products.
* **Quantisation.** Each copy is held as integer codes (0 = no value) of a
  :class:`Quantiser`: FS truncated to 0.01 (never above the computed value,
  and in the same screening band), probabilities rounded to 0.001, wetness
  to 0.01, slope to 0.1 degree, critical recharge and specific catchment
  area to within 0.5 % (a logarithmic step), counts and ids exactly.
* **Packing.** The codes are packed into the red, green and blue bytes of a
  lossless RGB PNG (:func:`pack_png`), which the page decodes with canvas
  ``getImageData``; PNG's row filters and deflate make smooth fields small.

A run's writer (:mod:`slopescreen.pipeline.staging`) makes the copy of each
mapped product while it is in memory (:func:`explorer_copy`), so the report
reads no product back. Memory: the copy is reduced one strip of block rows at
a time (:data:`STRIP_CELLS` grid cells of float32 temporaries), then about
11 bytes per embedded cell while it is encoded (4 for the reduced float32
values, 4 for the codes, 3 for the RGB bytes), of which only the PNG is
kept (measured 0.1 to 1.5 bytes per embedded cell; docs/performance.md).
"""

from __future__ import annotations

import base64
import io
import math
from dataclasses import dataclass

import numpy as np

from .styles import FS_BANDS, at_least

__all__ = [
    "MAX_CELLS", "RULES", "QUANTISERS", "Quantiser", "ExplorerCopy", "block_factor",
    "decimate", "explorer_copy", "coarser", "encode_rows", "pack_png", "unpack_png", "rule_words",
]

MAX_CELLS = 4_000_000
"""Most cells of one embedded layer; a larger grid is reduced by blocks (:func:`block_factor`)."""

PNG_LEVEL = 1
"""zlib level of the packed PNGs: on a 2000 x 2000 slope layer level 1 takes 0.3 s and is 5 %
larger than level 6, which takes 2.0 s (docs/performance.md)."""

STRIP_CELLS = 4_000_000
"""Grid cells reduced at once (bounds the temporaries of :func:`decimate`)."""

RULES = {
    "factor_of_safety": "min", "cluster_fs_bound": "min", "critical_recharge": "min",
    "critical_recharge_class": "min", "failure_probability": "max", "runout_count": "max",
    "cluster_labels": "max", "slope": "mean", "wetness": "mean",
    "specific_catchment_area": "mean", "soil_unit": "mode", "corridor_segment": "min",
}
"""How a block of cells is reduced to one, per layer: the worst value of hazard products
(``"min"``, ``"max"``), the mean of descriptive ones, the most common soil unit."""

_RULE_WORDS = {"min": "least", "max": "largest", "mean": "mean", "mode": "most common"}


def rule_words(key: str) -> str:
    """How a block of a layer is reduced, in words.

    Examples
    --------
    >>> rule_words("factor_of_safety")
    'least'
    """
    return _RULE_WORDS[RULES[key]]


def block_factor(shape, max_cells: int = MAX_CELLS) -> int:
    """Smallest block side ``k`` that brings a grid within ``max_cells`` cells.

    Examples
    --------
    >>> block_factor((2000, 2000)), block_factor((2001, 2000)), block_factor((10000, 10000))
    (1, 2, 5)
    """
    rows, cols = (int(n) for n in shape)
    k = max(1, math.ceil(math.sqrt(rows * cols / max_cells)) - 1)
    while -(-rows // k) * -(-cols // k) > max_cells:
        k += 1
    return k


def decimate(values, k: int, rule: str, *, strip_cells: int = STRIP_CELLS) -> np.ndarray:
    """Reduce a grid by ``k x k`` blocks.

    Parameters
    ----------
    values : array_like, shape (rows, cols)
        Float values (NaN = no value), or integer codes for ``"mode"``
        (negative = no value).
    k : int
        Block side (1 returns a float32 copy).
    rule : {"min", "max", "mean", "mode"}
        Least, largest or mean of the valid cells of each block; ``"mode"``
        the most common non-negative code (the smallest on a tie).
    strip_cells : int
        Grid cells reduced at once.

    Returns
    -------
    numpy.ndarray, shape (ceil(rows / k), ceil(cols / k))
        float32 (NaN where a block has no valid cell); int32 for ``"mode"``
        (-1 where none). Edge blocks hold the cells the grid has.

    Examples
    --------
    >>> import numpy as np
    >>> v = np.array([[1.0, 2.0, 5.0], [np.nan, 4.0, np.nan]])
    >>> decimate(v, 2, "min").tolist(), decimate(v, 2, "mean").tolist()
    ([[1.0, 5.0]], [[2.3333332538604736, 5.0]])
    """
    a = np.asarray(values)
    if a.ndim != 2:
        raise ValueError(f"decimate: expected a 2-D grid, got shape {a.shape}")
    if rule not in _RULE_WORDS:
        raise ValueError(f"decimate: unknown rule {rule!r}")
    rows, cols = a.shape
    out_r, out_c = -(-rows // k), -(-cols // k)
    if rule == "mode":
        out = np.full((out_r, out_c), -1, dtype=np.int32)
    else:
        out = np.full((out_r, out_c), np.nan, dtype=np.float32)
    band = max(1, strip_cells // max(1, k * cols))      # block rows per strip
    for b0 in range(0, out_r, band):
        b1 = min(out_r, b0 + band)
        strip = a[b0 * k:min(rows, b1 * k)]
        out[b0:b1] = _reduce_strip(strip, k, rule, b1 - b0, out_c)
    return out


def _reduce_strip(strip, k, rule, nb_r, nb_c):
    """One strip of block rows, padded to whole blocks and reduced."""
    r, c = strip.shape
    if rule == "mode":
        pad = np.full((nb_r * k, nb_c * k), -1, dtype=np.int32)
        pad[:r, :c] = strip
        blocks = pad.reshape(nb_r, k, nb_c, k)
        best = np.full((nb_r, nb_c), -1, dtype=np.int32)
        most = np.zeros((nb_r, nb_c), dtype=np.int32)
        for code in np.unique(pad[pad >= 0]):
            n = (blocks == code).sum(axis=(1, 3), dtype=np.int32)
            take = n > most
            best[take] = code
            most[take] = n[take]
        return best
    pad = np.full((nb_r * k, nb_c * k), np.nan, dtype=np.float32)
    pad[:r, :c] = strip
    blocks = pad.reshape(nb_r, k, nb_c, k)
    valid = ~np.isnan(blocks)
    n = valid.sum(axis=(1, 3))
    if rule == "mean":
        total = np.where(valid, blocks, 0.0).sum(axis=(1, 3), dtype=np.float64)
        with np.errstate(invalid="ignore", divide="ignore"):
            res = (total / n).astype(np.float32)
    elif rule == "min":
        res = np.where(valid, blocks, np.inf).min(axis=(1, 3))
    else:
        res = np.where(valid, blocks, -np.inf).max(axis=(1, 3))
    return np.where(n > 0, res, np.nan).astype(np.float32)


@dataclass(frozen=True)
class Quantiser:
    """Integer codes for the values of one layer (0 = no value).

    A value ``v`` is stored as code ``1 + n``, where ``n`` counts steps of
    ``step`` from ``lo`` (of ``log10(v)`` when ``log``), rounded to the
    nearest (or, with ``floor``, truncated: the decoded value is never above
    the value). ``thresholds`` are values at which the decoded value must
    fall on the same side as the value (the FS screening bands).

    Attributes
    ----------
    step, lo : float
    log : bool
    floor : bool
    decimals : int
        Decimals shown (linear) or significant figures shown (log).
    thresholds : tuple of float
    rounding : str
        The rounding in words, for the page.

    Examples
    --------
    >>> import numpy as np
    >>> q = QUANTISERS["factor_of_safety"]
    >>> codes = q.encode(np.array([0.996, 1.0, 1.2999, np.nan], dtype=np.float32))
    >>> codes.tolist(), q.decode(codes).round(2).tolist()[:3]
    ([100, 101, 130, 0], [0.99, 1.0, 1.29])
    """

    step: float
    lo: float = 0.0
    log: bool = False
    floor: bool = False
    decimals: int = 2
    thresholds: tuple = ()
    rounding: str = ""

    MAX_CODE = (1 << 24) - 1

    def encode(self, values) -> np.ndarray:
        """Codes (uint32) of float values; NaN, and a non-positive value of a log layer, give 0."""
        v = np.asarray(values)
        if not np.issubdtype(v.dtype, np.floating):
            v = v.astype(np.float64)
        with np.errstate(invalid="ignore", divide="ignore"):
            x = np.log10(v.astype(np.float64)) if self.log else v.astype(np.float64)
            n = (x - self.lo) / self.step
            n = np.floor(n) if self.floor else np.rint(n)
        ok = np.isfinite(n)
        n = np.clip(np.where(ok, n, 0.0), 0, self.MAX_CODE - 1).astype(np.int64)
        for t in self.thresholds:               # same side of each band bound as the value
            tn = int(round((t - self.lo) / self.step))
            above = at_least(v, t)
            n = np.where(above & (n < tn), tn, n)
            n = np.where(~above & (n >= tn), tn - 1, n)
        return np.where(ok, n + 1, 0).astype(np.uint32)

    def decode(self, codes) -> np.ndarray:
        """Values (float64; NaN for code 0) of codes, as the page decodes them."""
        c = np.asarray(codes).astype(np.float64)
        x = self.lo + (c - 1.0) * self.step
        v = 10.0 ** x if self.log else x
        return np.where(c > 0, v, np.nan)

    def as_dict(self) -> dict:
        """What the page needs to decode the codes."""
        return {"step": self.step, "lo": self.lo, "log": self.log, "decimals": self.decimals,
                "rounding": self.rounding}


_FS_BOUNDS = tuple(upper for upper, _label, _colour in FS_BANDS if math.isfinite(upper))
_FS = Quantiser(0.01, floor=True, decimals=2, thresholds=_FS_BOUNDS,
                rounding="truncated to 0.01 (never above the computed value)")
_P = Quantiser(0.001, decimals=3, rounding="rounded to 0.001")
_LOG = Quantiser(0.004, lo=-8.0, log=True, decimals=3,
                 rounding="to within 0.5 % (a logarithmic step)")
_COUNT = Quantiser(1.0, decimals=0, rounding="exact")

QUANTISERS = {
    "factor_of_safety": _FS, "cluster_fs_bound": _FS, "failure_probability": _P,
    "wetness": Quantiser(0.01, decimals=2, rounding="rounded to 0.01"), "slope": Quantiser(0.1, decimals=1, rounding="rounded to 0.1 degree"),
    "critical_recharge": _LOG, "specific_catchment_area": _LOG, "runout_count": _COUNT,
    "critical_recharge_class": _COUNT, "cluster_labels": _COUNT, "soil_unit": _COUNT,
    "corridor_segment": _COUNT,
}
"""The :class:`Quantiser` of each layer."""


def pack_png(codes) -> bytes:
    """Codes below 2**24 as a lossless RGB PNG: red the low byte, green the middle, blue the high.

    The PNG has no gamma or colour-profile chunk, so a browser decodes the
    bytes unchanged.

    Examples
    --------
    >>> import numpy as np
    >>> c = np.array([[0, 1, 70000], [255, 256, 2**24 - 1]], dtype=np.uint32)
    >>> bool((unpack_png(pack_png(c)) == c).all())
    True
    """
    from PIL import Image

    c = np.asarray(codes, dtype=np.uint32)
    if c.size and int(c.max()) >= 1 << 24:
        raise ValueError("pack_png: codes must be below 2**24")
    rgb = np.empty(c.shape + (3,), dtype=np.uint8)
    rgb[..., 0] = c & 0xFF
    rgb[..., 1] = (c >> 8) & 0xFF
    rgb[..., 2] = (c >> 16) & 0xFF
    buf = io.BytesIO()
    Image.fromarray(rgb, mode="RGB").save(buf, format="png", compress_level=PNG_LEVEL)
    return buf.getvalue()


def unpack_png(png: bytes) -> np.ndarray:
    """The codes (uint32) of a PNG made by :func:`pack_png`."""
    from PIL import Image

    rgb = np.asarray(Image.open(io.BytesIO(png)).convert("RGB")).astype(np.uint32)
    return rgb[..., 0] | (rgb[..., 1] << 8) | (rgb[..., 2] << 16)


def shade_png(shade) -> bytes:
    """Hillshade in [0, 1] (NaN = no DEM value) as a grey PNG: 0 no value, 1 to 255 the shade."""
    from PIL import Image

    s = np.asarray(shade, dtype=np.float32)
    grey = np.where(np.isnan(s), 0, 1 + np.rint(np.clip(s, 0.0, 1.0) * 254.0)).astype(np.uint8)
    buf = io.BytesIO()
    Image.fromarray(grey, mode="L").save(buf, format="png", compress_level=PNG_LEVEL)
    return buf.getvalue()


@dataclass(frozen=True)
class ExplorerCopy:
    """One layer of the interactive map: its codes packed in a PNG.

    Attributes
    ----------
    key : str
        Product key (or ``"soil_unit"``, ``"corridor_segment"``).
    shape : tuple of int
        Rows and columns of the embedded layer.
    k : int
        Block side (1 = full resolution).
    png : bytes
        :func:`pack_png` of the codes.
    """

    key: str
    shape: tuple
    k: int
    png: bytes

    @property
    def quantiser(self) -> Quantiser:
        return QUANTISERS[self.key]

    def codes(self) -> np.ndarray:
        """The codes, unpacked (for tests and tools)."""
        return unpack_png(self.png)

    def values(self) -> np.ndarray:
        """The decoded values, as the page shows them."""
        return self.quantiser.decode(self.codes())

    def as_dict(self) -> dict:
        return {"key": self.key, "rule": rule_words(self.key) if self.k > 1 else "",
                "rows": int(self.shape[0]), "cols": int(self.shape[1]), "k": int(self.k),
                "q": self.quantiser.as_dict(),
                "png": base64.b64encode(self.png).decode("ascii")}


def explorer_copy(key: str, data, k: int) -> ExplorerCopy:
    """The embedded copy of one layer: reduced by ``k x k`` blocks, quantised, packed.

    Parameters
    ----------
    key : str
        A key of :data:`QUANTISERS`.
    data : numpy.ndarray, shape (rows, cols)
        The product as written (float NaN = no value; integer counts with a
        negative nodata; the class band with 0 = nodata; the soil unit index
        with -1 = none).
    k : int
        Block side (:func:`block_factor`).

    Examples
    --------
    >>> import numpy as np
    >>> fs = np.array([[0.5, 2.0], [1.2, np.nan]], dtype=np.float32)
    >>> copy = explorer_copy("factor_of_safety", fs, 2)
    >>> copy.shape, copy.values().tolist()
    ((1, 1), [[0.5]])
    """
    a = np.asarray(data)
    rule = RULES[key]
    if rule == "mode":
        reduced = decimate(a, k, "mode").astype(np.float32)
        reduced[reduced < 0] = np.nan
    elif a.dtype.kind in "iu":
        if key == "critical_recharge_class":
            nodata = a == 0
        else:
            nodata = a < 0
        if k == 1:
            reduced = np.where(nodata, np.nan, a).astype(np.float32)
        else:
            reduced = _decimate_ints(a, k, rule, key)
    else:
        reduced = decimate(a, k, rule) if k > 1 else a.astype(np.float32, copy=False)
    codes = encode_rows(QUANTISERS[key], reduced)
    del reduced
    return ExplorerCopy(key, tuple(codes.shape), int(k), pack_png(codes))


def encode_rows(q: Quantiser, values, *, rows_at_once: int = 256) -> np.ndarray:
    """:meth:`Quantiser.encode` of a grid a few rows at a time (bounds the float64 temporaries)."""
    v = np.asarray(values)
    out = np.empty(v.shape, dtype=np.uint32)
    for r0 in range(0, v.shape[0], rows_at_once):
        out[r0:r0 + rows_at_once] = q.encode(v[r0:r0 + rows_at_once])
    return out


def coarser(copy: ExplorerCopy) -> ExplorerCopy:
    """The next level of the pyramid: a copy reduced by 2 x 2 blocks of its own cells.

    Least and largest values compose exactly (the block of 2k cells gets the
    same value as a direct reduction); a mean is the mean of the four block
    means, which equals the direct mean where every block is full. Codes of
    ids and soil units keep the most common code.

    Examples
    --------
    >>> import numpy as np
    >>> fs = np.arange(16, dtype=np.float32).reshape(4, 4) / 10
    >>> coarser(explorer_copy("factor_of_safety", fs, 1)).values().tolist()
    [[0.0, 0.2], [0.8, 1.0]]
    """
    q = copy.quantiser
    rule = RULES[copy.key]
    codes = copy.codes()
    if rule == "mean":
        codes = encode_rows(q, decimate(q.decode(codes).astype(np.float32), 2, "mean"))
    else:                   # codes order as the values do (below 2**24: exact in float32)
        as_float = np.where(codes > 0, codes, np.nan).astype(np.float32)
        reduced = decimate(as_float, 2, rule) if rule != "mode" else \
            decimate(np.where(codes > 0, codes, 0).astype(np.int64) - 1, 2, "mode") + 1.0
        codes = np.where(np.isfinite(reduced) & (reduced > 0), reduced, 0).astype(np.uint32)
    return ExplorerCopy(copy.key, tuple(codes.shape), copy.k * 2, pack_png(codes))


def _decimate_ints(a, k, rule, key):
    """:func:`decimate` of an integer band, one strip of block rows at a time (no full copy)."""
    rows, cols = a.shape
    band = max(1, STRIP_CELLS // max(1, k * cols))
    out_r = -(-rows // k)
    parts = []
    for b0 in range(0, out_r, band):
        strip = a[b0 * k:min(rows, (b0 + band) * k)]
        bad = strip == 0 if key == "critical_recharge_class" else strip < 0
        parts.append(decimate(np.where(bad, np.nan, strip).astype(np.float32), k, rule))
    return np.concatenate(parts, axis=0)
