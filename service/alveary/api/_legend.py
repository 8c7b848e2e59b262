"""Legends for map tiles: a colour bar with the variable's name, units and value range, as
PNG (Pillow) or SVG.

Both show the same things: a title line (``long name (units)``), the bar from the low end
of the range to the high end, the range's end values under the bar's ends and a few round
values between them.
"""

from __future__ import annotations

import io
import math
from xml.sax.saxutils import escape

import numpy as np
from PIL import Image, ImageDraw, ImageFont

from alveary.api._colours import ColourScale

__all__ = ["SVG_MEDIA_TYPE", "format_value", "legend_png", "legend_svg", "legend_ticks"]

SVG_MEDIA_TYPE = "image/svg+xml"
_MARGIN = 12
_BAR_TOP = 24
_BAR_HEIGHT = 14
_TEXT = (34, 34, 40, 255)


def legend_ticks(vmin: float, vmax: float, count: int = 5) -> list[float]:
    """Round values inside [vmin, vmax]: steps of 1, 2, 2.5 or 5 times a power of ten.

    >>> legend_ticks(0.05, 0.42)
    [0.1, 0.2, 0.3, 0.4]
    >>> legend_ticks(271.3, 308.9)
    [280.0, 290.0, 300.0]
    """
    span = float(vmax) - float(vmin)
    if not (math.isfinite(span) and span > 0):
        return []
    raw = span / max(count, 1)
    power = 10.0 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1.0, 2.0, 2.5, 5.0, 10.0) if m * power >= raw)
    first = math.ceil(vmin / step - 1e-9)
    last = math.floor(vmax / step + 1e-9)
    return [round(k * step, 12) for k in range(first, last + 1)]


def format_value(value: float, span: float) -> str:
    """A value written with as many decimals as the range's size calls for.

    >>> format_value(0.123456, 0.4), format_value(283.25, 40.0), format_value(-0.0, 2.0)
    ('0.123', '283.2', '0.00')
    """
    if not math.isfinite(value):
        return str(value)
    decimals = max(0, 2 - math.floor(math.log10(span))) if span > 0 else 3
    text = f"{value:.{min(decimals, 8)}f}"
    return "0" + text[2:] if text.startswith("-0") and float(text) == 0 else text


def _title(name: str, units: str) -> str:
    return f"{name} ({units})" if units else name


def _labels(vmin: float, vmax: float, width: int) -> list[tuple[float, str]]:
    """(x position, text) for the range ends and the round values that fit between them.

    Labels are about 7 pixels a character at 12 px; a round value is kept only where it
    clears its neighbours by 8 pixels.
    """
    span = vmax - vmin
    bar = width - 2 * _MARGIN
    ends = [
        (float(_MARGIN), format_value(vmin, span)),
        (float(width - _MARGIN), format_value(vmax, span)),
    ]

    def extent(x: float, text: str) -> tuple[float, float]:
        half = 3.5 * len(text)
        if x <= _MARGIN:  # the end labels sit inside the picture
            return x, x + 2 * half
        if x >= width - _MARGIN:
            return x - 2 * half, x
        return x - half, x + half

    taken = [extent(x, t) for x, t in ends]
    out = list(ends)
    for t in legend_ticks(vmin, vmax):
        x = _MARGIN + (t - vmin) / span * bar
        text = format_value(t, span)
        lo, hi = extent(x, text)
        if all(hi + 8 <= a or lo - 8 >= b for a, b in taken):
            taken.append((lo, hi))
            out.append((x, text))
    return out


def legend_png(
    scale: ColourScale,
    vmin: float,
    vmax: float,
    *,
    title: str,
    units: str = "",
    width: int = 320,
    height: int = 64,
) -> bytes:
    """A legend as PNG bytes: title with units, colour bar, values under it.

    >>> from alveary.api._colours import colour_scale
    >>> png = legend_png(colour_scale("clover"), 0.05, 0.42, title="soil moisture", units="m3 m-3")
    >>> png[1:4]
    b'PNG'
    """
    image = Image.new("RGBA", (width, height), (255, 255, 255, 230))
    draw = ImageDraw.Draw(image)
    font = ImageFont.load_default(size=12)
    draw.text((_MARGIN, 5), _title(title, units), fill=_TEXT, font=font)
    bar = width - 2 * _MARGIN
    pos = np.rint(np.linspace(0, len(scale.lut) - 1, bar)).astype(np.int64)
    strip = np.repeat(scale.lut[pos][None, :, :], _BAR_HEIGHT, axis=0)
    image.paste(Image.fromarray(np.ascontiguousarray(strip), "RGBA"), (_MARGIN, _BAR_TOP))
    draw.rectangle(
        (_MARGIN - 1, _BAR_TOP - 1, _MARGIN + bar, _BAR_TOP + _BAR_HEIGHT), outline=_TEXT
    )
    below = _BAR_TOP + _BAR_HEIGHT
    for x, text in _labels(vmin, vmax, width):
        draw.line((x, below, x, below + 4), fill=_TEXT)
        size = draw.textlength(text, font=font)
        left = min(max(x - size / 2, 2), width - 2 - size)
        draw.text((left, below + 6), text, fill=_TEXT, font=font)
    out = io.BytesIO()
    image.save(out, format="PNG")
    return out.getvalue()


def legend_svg(
    scale: ColourScale,
    vmin: float,
    vmax: float,
    *,
    title: str,
    units: str = "",
    width: int = 320,
    height: int = 64,
) -> bytes:
    """A legend as SVG (UTF-8 bytes): title with units, a gradient bar, values under it.

    >>> from alveary.api._colours import colour_scale
    >>> svg = legend_svg(colour_scale("honey"), 270.0, 310.0, title="canopy temperature", units="K")
    >>> svg.startswith(b"<svg") and b"canopy temperature (K)" in svg
    True
    """
    bar = width - 2 * _MARGIN
    stops = []
    for k in range(33):  # every 8th entry: the gradient between them is near-linear
        i = min(round(k * (len(scale.lut) - 1) / 32), len(scale.lut) - 1)
        r, g, b = (int(c) for c in scale.lut[i, :3])
        stops.append(f'<stop offset="{k / 32:.5f}" stop-color="#{r:02x}{g:02x}{b:02x}"/>')
    below = _BAR_TOP + _BAR_HEIGHT
    marks = []
    for x, text in _labels(vmin, vmax, width):
        anchor = "start" if x <= _MARGIN else "end" if x >= width - _MARGIN else "middle"
        marks.append(
            f'<line x1="{x:.1f}" y1="{below}" x2="{x:.1f}" y2="{below + 4}" stroke="#222228"/>'
            f'<text x="{x:.1f}" y="{below + 16}" text-anchor="{anchor}">{escape(text)}</text>'
        )
    gradient = f"legend-{scale.name}"
    svg = (
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
        f'viewBox="0 0 {width} {height}" font-family="system-ui, sans-serif" font-size="12" '
        f'fill="#222228" role="img">'
        f"<title>{escape(_title(title, units))}: {escape(scale.name)} colour scale</title>"
        f'<defs><linearGradient id="{gradient}" x1="0" x2="1" y1="0" y2="0">'
        f"{''.join(stops)}</linearGradient></defs>"
        f'<rect width="{width}" height="{height}" fill="#ffffff" fill-opacity="0.9"/>'
        f'<text x="{_MARGIN}" y="17">{escape(_title(title, units))}</text>'
        f'<rect x="{_MARGIN}" y="{_BAR_TOP}" width="{bar}" height="{_BAR_HEIGHT}" '
        f'fill="url(#{gradient})" stroke="#222228" stroke-width="1"/>'
        f"{''.join(marks)}</svg>"
    )
    return svg.encode()
