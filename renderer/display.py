"""Display models: how code values become luminance on a screen, and back.

A stimulus is a linear-light float image (the model's output, values in [0, 1]:
0 the display's black, 1 its white).  A *display model* says which luminance in
cd/m² each code value produces and inverts that, so a requested luminance becomes a
continuous code position that a quantiser (:mod:`renderer.dither`) turns into
integers.  Three kinds:

* ``srgb`` (default): the IEC 61966-2-1 transfer function between black and white;
* ``gamma``: a power law L = black + (white − black)·(code/max)^gamma;
* ``table``: a photometer table (CSV) of code value against cd/m², grey or per channel,
  interpolated monotonically (Fritsch & Carlson 1980, SIAM J. Numer. Anal. 17:238, via
  ``scipy.interpolate.PchipInterpolator``) at every integer code.

Relative values map to luminance as L = black + v·(white − black), so ``v`` is the
fraction of the displayable range; :func:`parse_target` converts targets given in
cd/m² or as a fraction of white.  Colour images are reduced to luminance with the
Y row of the sRGB/BT.709 primaries (0.2126, 0.7152, 0.0722; IEC 61966-2-1) for the
analytic and grey-table kinds; a per-channel table gives each channel's own
contribution above black.  This module does not quantise (see :mod:`renderer.dither`)
and does not write files.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field

import numpy as np
from scipy.interpolate import PchipInterpolator

from .composite import linear_to_srgb, srgb_to_linear
from .errors import MagretinaError
from .inputs import read_csv_rows
from .kernels.codes import CodeTable, clip_unit_float64, code_luminance, luminance_moments

KINDS = ("srgb", "gamma", "table")
BITS = (8, 10, 16)
#: Y row of the sRGB (ITU-R BT.709) primaries, IEC 61966-2-1.
Y_WEIGHTS = np.array([0.2126, 0.7152, 0.0722])
#: Reference display white of IEC 61966-2-1 (80 cd/m², from memory).
DEFAULT_WHITE_CD_M2 = 80.0
#: A table needs black, white and at least one point between them: with two rows the
#: interpolant would be a straight line, i.e. no calibration of a non-linear display.
MIN_TABLE_ROWS = 3
GREY_COLUMNS = ("code", "cd_m2")
RGB_COLUMNS = ("code", "red_cd_m2", "green_cd_m2", "blue_cd_m2")


@dataclass(frozen=True)
class Display:
    """A display model (see the module docstring).

    Attributes
    ----------
    kind : "srgb" | "gamma" | "table"
    bits : 8, 10 or 16 (code values 0 .. 2**bits − 1)
    black_cd_m2, white_cd_m2 : luminance of code 0 and of full white, cd/m²
    gamma : exponent of the ``gamma`` kind
    table : path of the CSV of the ``table`` kind
    lut : (3, 2**bits) float64, each channel's luminance above black at every code, cd/m²
        (the displayed luminance of codes (r, g, b) is black + lut[0, r] + lut[1, g] +
        lut[2, b])
    """

    kind: str = "srgb"
    bits: int = 8
    black_cd_m2: float = 0.0
    white_cd_m2: float = DEFAULT_WHITE_CD_M2
    gamma: float | None = None
    table: str | None = None
    lut: np.ndarray = field(default=None, repr=False, compare=False)
    per_channel: bool = False

    @property
    def channels_alike(self) -> bool:
        """True when every channel follows the same normalised curve (analytic kinds and
        grey tables): a grey image's codes are then equal across channels."""
        return not self.per_channel

    @property
    def max_code(self) -> int:
        return (1 << self.bits) - 1

    @property
    def is_default(self) -> bool:
        """The 8-bit sRGB display whose rounding is the historical output."""
        return self.kind == "srgb" and self.bits == 8

    def relative_curve(self, x) -> np.ndarray:
        """Normalised transfer of the analytic kinds: code/max in [0, 1] -> relative L."""
        x = np.asarray(x, np.float64)
        if self.kind == "srgb":
            return srgb_to_linear(x)
        return np.clip(x, 0.0, 1.0) ** self.gamma

    def continuous_code(self, lin) -> np.ndarray:
        """Code positions (float64, same shape as ``lin``, in [0, max]) for relative
        linear values ``lin`` by the exact inverse of the transfer.

        ``srgb``: the IEC 61966-2-1 encoding times max (so rounding reproduces the
        plain 8-bit sRGB output bit for bit); ``gamma``: max·v^(1/gamma); ``table``:
        the inverse of the interpolated table, linear in luminance between integer
        codes (:meth:`linear_code`)."""
        v = np.clip(np.asarray(lin, np.float64), 0.0, 1.0)
        if self.kind == "srgb":
            return linear_to_srgb(v) * self.max_code
        if self.kind == "gamma":
            return v ** (1.0 / self.gamma) * self.max_code
        return self.linear_code(v)

    def linear_code(self, lin) -> np.ndarray:
        """Code positions k + p with L(k) ≤ target < L(k+1) and p the fraction of the
        luminance step: rounding up with probability p makes the expected displayed
        luminance equal the target exactly (the quantity a dithering quantiser needs).

        ``lin`` is (..., 3) or (...); channel c uses its own column of :attr:`lut`."""
        v = np.clip(np.asarray(lin, np.float64), 0.0, 1.0)
        if self.kind in ("srgb", "gamma"):
            # Every channel follows the same normalised curve g: the exact inverse gives
            # k (within float rounding, which the clip of p absorbs), two table reads p.
            # About twice as fast as np.interp over the table (bench/encode.py).
            g = self.code_luminance()
            k = np.minimum(self.continuous_code(v).astype(np.intp), self.max_code - 1)
            lo = g[k]
            return k + np.clip((v - lo) / (g[k + 1] - lo), 0.0, 1.0)
        codes = np.arange(self.max_code + 1, dtype=np.float64)
        if v.ndim and v.shape[-1] == 3:
            out = np.empty_like(v)
            for c in range(3):
                out[..., c] = np.interp(v[..., c] * self.lut[c, -1], self.lut[c], codes)
            return out
        lum = self.lut.sum(axis=0)
        return np.interp(v * lum[-1], lum, codes)

    def code_luminance(self) -> np.ndarray:
        """Relative luminance of every code of an analytic kind, (2**bits,) float64
        (computed once per kind, bits and gamma; read-only)."""
        key = (self.kind, self.bits, self.gamma, "luminance")
        if key not in _THRESHOLDS:
            g = self.relative_curve(np.arange(self.max_code + 1) / self.max_code)
            g.setflags(write=False)
            _THRESHOLDS[key] = g
        return _THRESHOLDS[key]

    def code_thresholds(self, mode="round"):
        """Threshold table of this display's codes for float32 inputs, or None.

        ``mode`` "round": the codes of :meth:`continuous_code` rounded (half to even), as
        the plain quantiser writes them; "floor": the integer part k of
        :meth:`linear_code`, as the dithering quantisers use it.  Returns a
        :class:`renderer.kernels.codes.CodeTable` (16 buckets per code): thr[k] is the
        smallest float32 in [0, 1] whose code is at least k, found by bisection over the
        float32 values with this class's own transfer (so the table reproduces it bit for
        bit), and checked on the 64 float32 neighbours either side of every threshold.  Only
        the analytic kinds at 8 and 10 bits have one (a measured table interpolates, and
        a 16-bit table would cost more than it saves); None also if the check fails."""
        if self.kind not in ("srgb", "gamma") or self.bits not in THRESHOLD_BITS:
            return None
        key = (self.kind, self.bits, self.gamma, mode)
        if key not in _THRESHOLDS:
            _THRESHOLDS[key] = _threshold_table(self, mode)
        return _THRESHOLDS[key]

    def to_relative(self, cd_m2) -> np.ndarray:
        """Luminance in cd/m² -> relative value v = (L − black)/(white − black)."""
        return (np.asarray(cd_m2, np.float64) - self.black_cd_m2) / (self.white_cd_m2
                                                                     - self.black_cd_m2)

    def intended_luminance(self, lin) -> np.ndarray:
        """Luminance (cd/m², shape (...)) the continuous image asks for; ``lin`` (..., 3)."""
        lin = np.asarray(lin)
        if lin.dtype == np.float32:
            v = clip_unit_float64(lin)  # the same values as below, in one pass
        else:
            v = np.clip(np.asarray(lin, np.float64), 0.0, 1.0)
        return self.black_cd_m2 + v @ self.lut[:, -1]

    def displayed_luminance(self, codes) -> np.ndarray:
        """Luminance (cd/m², shape (...)) the display shows for integer codes (..., 3)."""
        c = np.asarray(codes)
        if (c.dtype in (np.uint8, np.uint16) and c.ndim >= 1 and c.shape[-1] == 3 and c.size
                and (c.dtype == np.uint8 or int(c.max()) <= self.max_code)):
            # the same sums in the same order, without three gathered temporaries
            return code_luminance(c, self.lut, self.black_cd_m2)
        return (self.black_cd_m2 + self.lut[0][c[..., 0]] + self.lut[1][c[..., 1]]
                + self.lut[2][c[..., 2]])

    def describe(self) -> dict:
        d = {"kind": self.kind, "bits": self.bits, "black_cd_m2": self.black_cd_m2,
             "white_cd_m2": self.white_cd_m2}
        if self.kind == "gamma":
            d["gamma"] = self.gamma
        if self.kind == "table":
            d["table"] = os.path.basename(self.table)
        return d


#: Bit depths whose analytic displays quantise through threshold tables.
THRESHOLD_BITS = (8, 10)
#: Float32 neighbours either side of each threshold checked against the transfer.
THRESHOLD_CHECK = 64
_ONE_BITS = 0x3F800000  # float32 1.0: the bit patterns of [0, 1] are 0 .. this, in order
_THRESHOLDS: dict = {}


def _reference_codes(display, x, mode):
    """The codes the NumPy path gives for float32 values x (float64 array of codes)."""
    c = display.continuous_code(x)
    if mode == "round":
        return np.round(c)
    return np.minimum(c.astype(np.intp), display.max_code - 1).astype(np.float64)


def _threshold_table(display, mode):
    top = display.max_code if mode == "round" else display.max_code - 1
    f32 = lambda b: np.asarray(b, np.uint32).view(np.float32)  # noqa: E731
    ks = np.arange(1, top + 1, dtype=np.float64)
    lo = np.zeros(top, np.int64)
    hi = np.full(top, _ONE_BITS, np.int64)
    reach = _reference_codes(display, f32(np.array([_ONE_BITS])), mode)[0] >= ks
    # invariant: code(lo) < k <= code(hi) (where k is reached at all)
    while np.any(hi - lo > 1):
        mid = (lo + hi) // 2
        up = _reference_codes(display, f32(mid), mode) >= ks
        hi = np.where(up, mid, hi)
        lo = np.where(up, lo, mid)
    thr = np.full(top + 2, np.inf, np.float32)
    thr[0] = -np.inf
    thr[1:top + 1] = np.where(reach, f32(hi), np.inf)
    # Check the table where a rounding of the transfer could disagree with it: the
    # float32 values around each threshold (elsewhere the code is far from a step).
    w = np.arange(-THRESHOLD_CHECK, THRESHOLD_CHECK + 1)
    bits = np.clip(hi[reach][:, None] + w[None, :], 0, _ONE_BITS).ravel()
    x = f32(bits)
    if not np.array_equal(np.searchsorted(thr[1:top + 1], x, side="right").astype(np.float64),
                          _reference_codes(display, x, mode)):
        return None
    return CodeTable.from_thresholds(thr, 16 << int(np.ceil(np.log2(top + 1))))


def make_display(kind="srgb", bits=8, black_cd_m2=None, white_cd_m2=None, gamma=None, table=None,
                 where="display", names=None) -> Display:
    """Build and check a display model; errors name ``where``'s keys and allowed ranges.

    Parameters
    ----------
    kind : "srgb" | "gamma" | "table"
    bits : 8, 10 or 16
    black_cd_m2, white_cd_m2 : analytic kinds only (default 0 and 80 cd/m²); a table
        measures them (its first and last rows)
    gamma : exponent of the ``gamma`` kind, (0, 10]
    table : CSV path of the ``table`` kind (see :func:`read_table`)
    where, names : how errors name the keys: ``{where}.{key}``, or ``names[key]`` (e.g.
        command-line flags)
    """
    names = names or {}

    def key(k):
        return names.get(k, f"{where}.{k}")

    if kind not in KINDS:
        raise MagretinaError(f"{key('kind')} = {kind!r}: allowed {', '.join(KINDS)}")
    if bits not in BITS or isinstance(bits, bool):
        raise MagretinaError(f"{key('bits')} = {bits!r}: allowed 8, 10, 16")
    n = 1 << int(bits)
    if kind == "table":
        for k, v in (("black_cd_m2", black_cd_m2), ("white_cd_m2", white_cd_m2), ("gamma", gamma)):
            if v is not None:
                raise MagretinaError(f"{key(k)}: not allowed with kind = 'table' (the table "
                                     f"gives the display's response)")
        if not table:
            raise MagretinaError(f"{key('table')}: missing (a CSV file, required for kind = "
                                 f"'table')")
        lut, black, per_channel = table_lut(table, int(bits))
        white = black + float(lut[:, -1].sum())
        return Display("table", int(bits), black, white, None, os.fspath(table), lut, per_channel)
    if table is not None:
        raise MagretinaError(f"{key('table')}: only for kind = 'table' (kind is {kind!r})")
    if kind == "gamma":
        if gamma is None:
            raise MagretinaError(f"{key('gamma')}: missing (required for kind = 'gamma'; "
                                 f"allowed (0, 10])")
        if not (isinstance(gamma, (int, float)) and 0.0 < gamma <= 10.0):
            raise MagretinaError(f"{key('gamma')} = {gamma!r}: allowed (0, 10]")
        gamma = float(gamma)
    elif gamma is not None:
        raise MagretinaError(f"{key('gamma')}: only for kind = 'gamma' (kind is {kind!r})")
    black = 0.0 if black_cd_m2 is None else black_cd_m2
    white = DEFAULT_WHITE_CD_M2 if white_cd_m2 is None else white_cd_m2
    for k, v in (("black_cd_m2", black), ("white_cd_m2", white)):
        if not isinstance(v, (int, float)) or isinstance(v, bool) or not np.isfinite(v) or v < 0:
            raise MagretinaError(f"{key(k)} = {v!r}: must be a number >= 0 (cd/m²)")
    if not white > black:
        raise MagretinaError(f"{key('white_cd_m2')} = {white!r}: must exceed black_cd_m2 = "
                             f"{black!r}")
    d = Display(kind, int(bits), float(black), float(white), gamma, None)
    rel = d.relative_curve(np.arange(n) / (n - 1))
    lut = (float(white) - float(black)) * Y_WEIGHTS[:, None] * rel[None, :]
    object.__setattr__(d, "lut", lut)
    return d


def read_table(path) -> tuple[np.ndarray, np.ndarray]:
    """Read a photometer table: codes (n,) int and luminance (n, 1 or 3) in cd/m².

    The CSV has a header row ``code,cd_m2`` (grey: all channels driven together) or
    ``code,red_cd_m2,green_cd_m2,blue_cd_m2`` (each channel alone, the others at 0);
    ``#`` lines are comments.  Codes must be integers and strictly increasing,
    luminance strictly increasing; the message names the file and row (line).
    """
    p = os.fspath(path)
    if not os.path.isfile(p):
        raise MagretinaError(f"display table {p}: no such file")
    # The shared input layer refuses huge, non-UTF-8 or binary files, naming them.
    lines = [(i + 1, row) for i, row in enumerate(read_csv_rows(p, "display table"))]
    lines = [(n, [c.strip() for c in r]) for n, r in lines
             if r and any(c.strip() for c in r) and not r[0].lstrip().startswith("#")]
    if not lines:
        raise MagretinaError(f"display table {p}: empty; need a header {','.join(GREY_COLUMNS)} "
                             f"or {','.join(RGB_COLUMNS)} and at least {MIN_TABLE_ROWS} rows")
    hline, header = lines[0]
    header = [h.lower() for h in header]
    if tuple(header) not in (GREY_COLUMNS, RGB_COLUMNS):
        raise MagretinaError(f"display table {p} line {hline}: header {','.join(header)!r}; "
                             f"allowed {','.join(GREY_COLUMNS)!r} or {','.join(RGB_COLUMNS)!r}")
    rows = lines[1:]
    if len(rows) < MIN_TABLE_ROWS:
        raise MagretinaError(f"display table {p}: {len(rows)} data rows; need at least "
                             f"{MIN_TABLE_ROWS} (black, white and at least one between)")
    codes, lum = [], []
    for n, r in rows:
        if len(r) != len(header):
            raise MagretinaError(f"display table {p} line {n}: {len(r)} columns; the header has "
                                 f"{len(header)}")
        try:
            c = float(r[0])
            vals = [float(x) for x in r[1:]]
        except ValueError:
            raise MagretinaError(f"display table {p} line {n}: {','.join(r)!r} is not numbers")
        if c != int(c):
            raise MagretinaError(f"display table {p} line {n}: code {r[0]!r} is not an integer")
        if not all(np.isfinite(vals)) or min(vals) < 0:
            raise MagretinaError(f"display table {p} line {n}: luminance must be finite and >= 0 "
                                 f"cd/m², got {','.join(r[1:])}")
        if codes:
            if c <= codes[-1]:
                raise MagretinaError(f"display table {p} line {n}: code {int(c)} does not "
                                     f"increase (previous row {int(codes[-1])}); rows must be "
                                     f"sorted by code, each code once")
            for j, (a, b) in enumerate(zip(lum[-1], vals)):
                if b <= a:
                    raise MagretinaError(f"display table {p} line {n}: {header[j + 1]} = {b:g} "
                                         f"is not above the previous row's {a:g}; luminance must "
                                         f"increase strictly with code (non-monotone table)")
        codes.append(c)
        lum.append(vals)
    return np.asarray(codes, np.int64), np.asarray(lum, np.float64)


def table_lut(path, bits) -> tuple[np.ndarray, float, bool]:
    """(3, 2**bits) per-channel luminance above black at every code, black (cd/m²), and
    whether the table was measured per channel."""
    codes, lum = read_table(path)
    top = (1 << bits) - 1
    p = os.fspath(path)
    if codes[0] != 0 or codes[-1] != top:
        raise MagretinaError(f"display table {p}: codes run {codes[0]}..{codes[-1]}; a {bits}-bit "
                             f"table must start at 0 and end at {top} (black and white are "
                             f"measured, not extrapolated)")
    x = np.arange(top + 1, dtype=np.float64)
    # PCHIP keeps monotone data monotone (Fritsch & Carlson 1980); strictly increasing
    # nodes give a non-decreasing curve, and the clip below rules out rounding dips.
    curves = PchipInterpolator(codes.astype(np.float64), lum, axis=0)(x)
    curves = np.maximum.accumulate(curves, axis=0)
    if lum.shape[1] == 1:
        black = float(lum[0, 0])
        grey = curves[:, 0] - black
        return Y_WEIGHTS[:, None] * grey[None, :], black, False
    black = float(lum[0].mean())
    return (curves - lum[0][None, :]).T.copy(), black, True


def parse_target(value, display: Display, where="target") -> float:
    """A luminance target as a relative value v (L = black + v·(white − black)).

    ``value`` is a number in [0, 1] (relative), a string ``"40 cd/m2"`` (absolute) or
    ``"0.25 white"`` (a fraction of the white luminance).  Raises naming ``where`` if
    the target is outside what the display can show."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        v = float(value)
        if not 0.0 <= v <= 1.0:
            raise MagretinaError(f"{where} = {value!r}: a relative luminance must be in [0, 1] "
                                 f"(or give '40 cd/m2' or '0.25 white')")
        return v
    s = str(value).strip().lower().replace("cd/m²", "cd/m2")
    try:
        if s.endswith("cd/m2"):
            L = float(s[:-5])
        elif s.endswith("white"):
            L = float(s[:-5]) * display.white_cd_m2
        else:
            raise ValueError
    except ValueError:
        raise MagretinaError(f"{where} = {value!r}: expected a number in [0, 1], 'X cd/m2' or "
                             f"'F white'") from None
    if not display.black_cd_m2 <= L <= display.white_cd_m2:
        raise MagretinaError(f"{where} = {value!r} ({L:g} cd/m²): the display shows "
                             f"{display.black_cd_m2:g}..{display.white_cd_m2:g} cd/m²")
    return float(display.to_relative(L))


SRGB8 = make_display()


def contrast_stats(lum, mask=None) -> dict:
    """Mean luminance and the Michelson and RMS contrast of a luminance image.

    Michelson contrast (Lmax − Lmin)/(Lmax + Lmin) and RMS contrast σ_L/μ_L (the
    population standard deviation over the mean; Peli 1990, J. Opt. Soc. Am. A 7:2032)
    over the pixels of ``mask`` (all if None).  Under dithering both include the
    dither noise: a per-pixel maximum is not what an observer averages.

    Parameters
    ----------
    lum : (H, W) cd/m²
    mask : (H, W) bool or None

    Returns
    -------
    {"mean_cd_m2", "michelson", "rms_contrast"} (NaN if no pixel or zero mean)
    """
    v = np.asarray(lum, np.float64)
    if mask is not None:
        v = v[np.asarray(mask, bool)]
    v = v.ravel()
    if v.size == 0:
        return {"mean_cd_m2": float("nan"), "michelson": float("nan"),
                "rms_contrast": float("nan")}
    mean = float(v.mean())
    hi, lo = float(v.max()), float(v.min())
    mich = (hi - lo) / (hi + lo) if hi + lo > 0 else float("nan")
    rms = float(v.std()) / mean if mean > 0 else float("nan")
    return {"mean_cd_m2": mean, "michelson": mich, "rms_contrast": rms}


def displayed_stats(display, lin, codes, mask=None, prefix="") -> dict:
    """Intended (continuous) and displayed (after quantisation) statistics side by side.

    Parameters
    ----------
    display : Display
    lin : (H, W, 3) relative linear light, the continuous image
    codes : (H, W, 3) integer codes of the same image after quantisation
    mask : (H, W) bool or None, the pixels to summarise
    prefix : prepended to every key

    Returns
    -------
    dict with ``{prefix}mean_cd_m2_intended``, ``..._displayed``, ``{prefix}michelson_*``
    and ``{prefix}rms_contrast_*`` (see :func:`contrast_stats`).
    """
    fast = _fast_stats(display, lin, codes, mask, prefix)
    if fast is not None:
        return fast
    out = {}
    for tag, lum in (("intended", display.intended_luminance(lin)),
                     ("displayed", display.displayed_luminance(codes))):
        for k, v in contrast_stats(lum, mask).items():
            out[f"{prefix}{k}_{tag}"] = v
    return out


def displayed_stats_grey(display, grey, codes, mask=None, prefix="") -> dict:
    """:func:`displayed_stats` of a grey image given by one channel: ``grey`` (H, W)
    linear values and ``codes`` (H, W), every channel the same."""
    fast = _fast_stats(display, grey, codes, mask, prefix)
    if fast is not None:
        return fast
    return displayed_stats(display, np.repeat(np.asarray(grey)[..., None], 3, axis=2),
                           np.repeat(np.asarray(codes)[..., None], 3, axis=2), mask, prefix)


def _fast_stats(display, lin, codes, mask, prefix):
    """The statistics by :func:`renderer.kernels.codes.luminance_moments` (the same
    numbers in one pass over the images), or None where it does not apply."""
    lin, codes = np.asarray(lin), np.asarray(codes)
    if not (lin.dtype == np.float32 and lin.ndim in (2, 3) and lin.shape[1] >= 2
            and codes.shape == lin.shape and (lin.ndim == 2 or lin.shape[2] == 3)
            and codes.dtype in (np.uint8, np.uint16) and codes.size
            and (mask is None or np.shape(mask) == lin.shape[:2])
            and (codes.dtype == np.uint8 or int(codes.max()) <= display.max_code)):
        return None
    n, m = luminance_moments(lin, codes, display.lut[:, -1], display.lut, display.black_cd_m2,
                             mask)
    out = {}
    for tag, (mean, hi, lo, var) in (("intended", m[:4]), ("displayed", m[4:])):
        if n == 0:
            stats = {"mean_cd_m2": float("nan"), "michelson": float("nan"),
                     "rms_contrast": float("nan")}
        else:
            # as contrast_stats computes them from these moments
            mean, hi, lo = float(mean), float(hi), float(lo)
            mich = (hi - lo) / (hi + lo) if hi + lo > 0 else float("nan")
            rms = float(np.sqrt(var)) / mean if mean > 0 else float("nan")
            stats = {"mean_cd_m2": mean, "michelson": mich, "rms_contrast": rms}
        for k, v in stats.items():
            out[f"{prefix}{k}_{tag}"] = v
    return out
