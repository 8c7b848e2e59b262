"""Colour scales for map tiles and legends, of the project's own design.

Each scale is a smooth path through OKLab (Ottosson 2020: a perceptual colour space where
Euclidean distance tracks perceived difference), drawn as a clamped cubic B-spline through
a few anchor colours given as lightness, chroma and hue, then cut into 256 entries of equal
OKLab path length, so equal steps in value look like equal steps in colour. Sequential
scales rise in lightness from end to end; the diverging scale is lightest in the middle.
Colours outside sRGB keep their lightness and hue and lose chroma until they fit.

Values are placed on a scale through a range (min, max): below min takes the first colour,
above max the last, and a missing value (NaN) is transparent.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from alveary._errors import InvalidInput

__all__ = [
    "DEFAULT_SCALE",
    "SCALES",
    "ColourScale",
    "apply_scale",
    "colour_scale",
    "linear_to_oklab",
    "oklab_to_linear",
    "parse_range",
    "scale_positions",
    "srgb_to_linear",
]

_STEPS = 256
_DENSE = 4096

# Ottosson (2020), "A perceptual color space for image processing": linear sRGB <-> LMS
# and the cube-rooted LMS <-> OKLab matrices.
_M1 = np.array(
    [
        [0.4122214708, 0.5363325363, 0.0514459929],
        [0.2119034982, 0.6806995451, 0.1073969566],
        [0.0883024619, 0.2817188376, 0.6299787005],
    ]
)
_M2 = np.array(
    [
        [0.2104542553, 0.7936177850, -0.0040720468],
        [1.9779984951, -2.4285922050, 0.4505937099],
        [0.0259040371, 0.7827717662, -0.8086757660],
    ]
)
_M2_INV = np.array(
    [
        [1.0, 0.3963377774, 0.2158037573],
        [1.0, -0.1055613458, -0.0638541728],
        [1.0, -0.0894841775, -1.2914855480],
    ]
)
_M1_INV = np.array(
    [
        [4.0767416621, -3.3077115913, 0.2309699292],
        [-1.2684380046, 2.6097574011, -0.3413193965],
        [-0.0041960863, -0.7034186147, 1.7076147010],
    ]
)


def srgb_to_linear(c: np.ndarray) -> np.ndarray:
    """The sRGB transfer function undone (IEC 61966-2-1), values in [0, 1].

    >>> round(float(srgb_to_linear(np.array(0.5))), 6)
    0.214041
    """
    c = np.asarray(c, dtype=np.float64)
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def _linear_to_srgb(c: np.ndarray) -> np.ndarray:
    c = np.clip(c, 0.0, 1.0)
    return np.where(c <= 0.0031308, 12.92 * c, 1.055 * c ** (1.0 / 2.4) - 0.055)


def linear_to_oklab(rgb: np.ndarray) -> np.ndarray:
    """OKLab (L, a, b) of linear sRGB triples (last axis).

    >>> np.round(linear_to_oklab(np.array([1.0, 1.0, 1.0])), 4).tolist()  # white
    [1.0, 0.0, 0.0]
    """
    lms = np.asarray(rgb, dtype=np.float64) @ _M1.T
    lab: np.ndarray = np.cbrt(lms) @ _M2.T
    return lab


def oklab_to_linear(lab: np.ndarray) -> np.ndarray:
    """Linear sRGB triples of OKLab (L, a, b); may fall outside [0, 1] (out of gamut)."""
    rgb: np.ndarray = (np.asarray(lab, dtype=np.float64) @ _M2_INV.T) ** 3 @ _M1_INV.T
    return rgb


def _lch(points: list[tuple[float, float, float]]) -> np.ndarray:
    out = np.array(points, dtype=np.float64)
    hue = np.radians(out[:, 2])
    return np.column_stack([out[:, 0], out[:, 1] * np.cos(hue), out[:, 1] * np.sin(hue)])


def _bspline(controls: np.ndarray, samples: int) -> np.ndarray:
    """A clamped uniform cubic B-spline through the end controls (inside their hull)."""
    pts = np.vstack([controls[:1], controls[:1], controls, controls[-1:], controls[-1:]])
    spans = len(pts) - 3
    u = np.linspace(0.0, spans, samples)
    k = np.minimum(u.astype(np.int64), spans - 1)
    t = (u - k)[:, None]
    basis = (
        ((1 - t) ** 3) / 6,
        (3 * t**3 - 6 * t**2 + 4) / 6,
        (-3 * t**3 + 3 * t**2 + 3 * t + 1) / 6,
        t**3 / 6,
    )
    out = np.zeros((samples, controls.shape[1]))
    for i, w in enumerate(basis):
        out += w * pts[k + i]
    return out


def _equal_steps(path: np.ndarray, steps: int) -> np.ndarray:
    """``steps`` points along a dense path, equally spaced in path length."""
    seg = np.linalg.norm(np.diff(path, axis=0), axis=1)
    s = np.concatenate([[0.0], np.cumsum(seg)])
    want = np.linspace(0.0, s[-1], steps)
    return np.column_stack([np.interp(want, s, path[:, i]) for i in range(3)])


def _into_gamut(lab: np.ndarray) -> np.ndarray:
    """Reduce chroma (keeping lightness and hue) until each colour fits in sRGB."""
    out = lab.copy()
    lo, hi = np.zeros(len(lab)), np.ones(len(lab))
    fits = np.all(np.abs(oklab_to_linear(lab) - 0.5) <= 0.5 + 1e-9, axis=1)
    if fits.all():
        return out
    for _ in range(30):  # bisection on the chroma factor of the colours that do not fit
        mid = (lo + hi) / 2
        trial = np.column_stack([lab[:, 0], lab[:, 1] * mid, lab[:, 2] * mid])
        ok = np.all(np.abs(oklab_to_linear(trial) - 0.5) <= 0.5 + 1e-9, axis=1)
        lo, hi = np.where(ok, mid, lo), np.where(ok, hi, mid)
    keep = np.where(fits, 1.0, lo)
    out[:, 1:] *= keep[:, None]
    return out


def _to_rgba8(lab: np.ndarray) -> np.ndarray:
    rgb = _linear_to_srgb(oklab_to_linear(lab))
    out = np.empty((len(lab), 4), dtype=np.uint8)
    out[:, :3] = np.rint(rgb * 255.0).astype(np.uint8)
    out[:, 3] = 255
    return out


def _edge_colours(lab: np.ndarray) -> np.ndarray:
    """Outline colours: darker on light colours, lighter on dark ones."""
    edge = lab.copy()
    edge[:, 0] = np.where(lab[:, 0] > 0.5, lab[:, 0] - 0.2, lab[:, 0] + 0.22)
    return _to_rgba8(_into_gamut(edge))


@dataclass(frozen=True, eq=False)
class ColourScale:
    """A named colour scale: 256 RGBA entries (and their outline colours) from low to high."""

    name: str
    kind: str
    description: str
    lab: np.ndarray = field(repr=False)
    lut: np.ndarray = field(repr=False)
    edge_lut: np.ndarray = field(repr=False)


def _sequential(
    name: str, description: str, anchors: list[tuple[float, float, float]]
) -> ColourScale:
    path = _bspline(_lch(anchors), _DENSE)
    lab = _into_gamut(_equal_steps(path, _STEPS))
    return ColourScale(name, "sequential", description, lab, _to_rgba8(lab), _edge_colours(lab))


def _diverging(
    name: str,
    description: str,
    low: list[tuple[float, float, float]],
    high: list[tuple[float, float, float]],
) -> ColourScale:
    # two halves from the light middle outwards; entry 128 is the middle colour
    half = _STEPS // 2
    down = _equal_steps(_bspline(_lch(low), _DENSE), half + 1)[:0:-1]
    up = _equal_steps(_bspline(_lch(high), _DENSE), half)
    lab = _into_gamut(np.vstack([down, up]))
    return ColourScale(name, "diverging", description, lab, _to_rgba8(lab), _edge_colours(lab))


def _build() -> dict[str, ColourScale]:
    scales = [
        _sequential(
            "nectar",
            "deep violet through rose and amber to pale cream; for any quantity",
            [
                (0.20, 0.09, 300.0),
                (0.40, 0.16, 335.0),
                (0.60, 0.17, 20.0),
                (0.77, 0.15, 60.0),
                (0.90, 0.13, 92.0),
                (0.97, 0.06, 105.0),
            ],
        ),
        _sequential(
            "clover",
            "dark slate blue through teal and leaf green to pale lime; moisture, vegetation",
            [
                (0.22, 0.05, 262.0),
                (0.40, 0.08, 222.0),
                (0.57, 0.11, 170.0),
                (0.74, 0.15, 138.0),
                (0.88, 0.14, 118.0),
                (0.97, 0.06, 108.0),
            ],
        ),
        _sequential(
            "honey",
            "dark umber through amber to pale wax yellow; heat, counts, intensity",
            [
                (0.18, 0.035, 40.0),
                (0.42, 0.09, 50.0),
                (0.65, 0.13, 66.0),
                (0.84, 0.13, 86.0),
                (0.97, 0.05, 96.0),
            ],
        ),
        _sequential(
            "wax",
            "near-neutral warm grey from dark to light; print, or a quiet background",
            [(0.16, 0.008, 70.0), (0.97, 0.008, 90.0)],
        ),
        _diverging(
            "drift",
            "blue below the middle of the range, pale at it, brick red above; anomalies",
            [(0.96, 0.012, 95.0), (0.78, 0.07, 235.0), (0.55, 0.12, 250.0), (0.32, 0.11, 265.0)],
            [(0.96, 0.012, 95.0), (0.78, 0.08, 62.0), (0.55, 0.14, 38.0), (0.32, 0.10, 28.0)],
        ),
    ]
    return {s.name: s for s in scales}


#: Every colour scale by name.
SCALES: dict[str, ColourScale] = _build()
#: The scale used when none is asked for.
DEFAULT_SCALE = "nectar"


def colour_scale(name: str | None) -> ColourScale:
    """The scale of a ``colormap`` parameter (None: the default).

    >>> colour_scale("honey").kind, colour_scale(None).name
    ('sequential', 'nectar')
    >>> colour_scale("rainbow")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: colormap is 'rainbow'; allowed: one of clover, drift, honey, nectar, wax
    """  # noqa: E501
    if name is None or not str(name).strip():
        return SCALES[DEFAULT_SCALE]
    found = SCALES.get(str(name).strip().lower())
    if found is None:
        raise InvalidInput("colormap", name, f"one of {', '.join(sorted(SCALES))}")
    return found


def parse_range(text: str | None) -> tuple[float, float] | None:
    """Parse ``range=min,max`` (finite, min < max); None or empty gives None.

    >>> parse_range("0.05, 0.4")
    (0.05, 0.4)
    >>> parse_range("3,3")
    Traceback (most recent call last):
    ...
    alveary._errors.InvalidInput: range is '3,3'; allowed: min,max: two finite numbers, min < max
    """
    if text is None or not text.strip():
        return None
    allowed = "min,max: two finite numbers, min < max"
    parts = text.split(",")
    try:
        lo, hi = (float(p) for p in parts)
    except ValueError:
        raise InvalidInput("range", text, allowed) from None
    if not (math.isfinite(lo) and math.isfinite(hi) and lo < hi):
        raise InvalidInput("range", text, allowed)
    return lo, hi


def scale_positions(values: np.ndarray, vmin: float, vmax: float) -> np.ndarray:
    """Entry (0..255) of each value on a scale over [vmin, vmax]; -1 where NaN.

    Values outside the range take the end entries.

    >>> scale_positions(np.array([0.0, 0.5, 1.0, 7.0, np.nan]), 0.0, 1.0).tolist()
    [0, 128, 255, 255, -1]
    """
    v = np.asarray(values, dtype=np.float64)
    span = float(vmax) - float(vmin)
    if not (math.isfinite(span) and span > 0):
        raise InvalidInput("range", (vmin, vmax), "min < max, both finite")
    pos = np.rint(np.clip((v - vmin) / span, 0.0, 1.0) * (_STEPS - 1))
    return np.where(np.isnan(v), -1, pos).astype(np.int16)


def apply_scale(
    values: np.ndarray, scale: ColourScale, vmin: float, vmax: float, *, edges: bool = False
) -> np.ndarray:
    """RGBA (uint8, shape (..., 4)) of values on a scale; transparent where NaN.

    With ``edges`` the outline colours are given instead.

    >>> apply_scale(np.array([0.0, np.nan]), colour_scale("wax"), 0.0, 1.0).tolist()
    [[16, 13, 10, 255], [0, 0, 0, 0]]
    """
    pos = scale_positions(values, vmin, vmax)
    table = np.vstack([scale.edge_lut if edges else scale.lut, np.zeros((1, 4), np.uint8)])
    rgba: np.ndarray = table[pos]  # position -1 is the transparent row
    return rgba
