"""Our colour maps, defined once for the page and the report images, so a view looks the same in both.

Each map is a few anchor colours. They are converted to OKLab (Ottosson 2020, a perceptual colour
space with a simple closed form), joined by straight lines in that space, and the path is resampled
at equal arc length into 255 entries, so neighbouring entries are the same perceptual distance apart.
Sequential maps have anchors of rising lightness; the diverging map falls to a light neutral in the
middle and rises again in the other hue. The server sends the finished tables to the page (hello
message); `matplotlib_map` builds a ListedColormap from the same tables for batch images.
"""
from __future__ import annotations

import math
from functools import lru_cache

#: Anchor colours (sRGB hex) of each map, dark to light for the sequential ones.
MAP_ANCHORS: dict[str, tuple[str, ...]] = {
    # warm clay: slate-black, dark umber, oxblood, terracotta, ochre, cream
    "kiln": ("#14161f", "#3b2330", "#7d3535", "#c2603a", "#e3a25a", "#f4e3b5"),
    # cool: night, deep blue, sea blue, teal, green, pale lime
    "lagoon": ("#0c1424", "#16365e", "#1f6f8b", "#3aa39a", "#8fd18a", "#eef5c2"),
    # moss to gold: near-black green, pine, moss, olive, gold, pale straw; for Mach number and speed
    "meadow": ("#0f1a14", "#1f3d2b", "#3f6b3a", "#8a9a3f", "#d8c35a", "#f7f0c8"),
    # a grey with a faint blue cast, for numerical schlieren (1 = still gas is light)
    "slate": ("#0f1317", "#f1f3f4"),
    # diverging: blue, neutral, brick; the middle level is zero for vorticity
    "seesaw": ("#1f4e8c", "#7da6d6", "#f1eee8", "#e09a73", "#9c3620"),
}

#: Maps whose middle is meant to sit on zero.
DIVERGING = frozenset({"seesaw"})

#: Which map each view starts with (the page lets the user pick another; reports use this one).
VIEW_MAPS: dict[str, str] = {
    "density": "lagoon",
    "pressure": "kiln",
    "temperature": "kiln",
    "mach": "meadow",
    "speed": "meadow",
    "schlieren": "slate",
    "vorticity": "seesaw",
}

#: Entries of a table: frame levels 0..254 are data; level 255 marks a wall or no gas.
DATA_LEVELS = 255
#: Wall colour: a flat dark blue-grey, distinct from every map's dark end.
WALL_RGB = (58, 64, 72)


# ----------------------------------------------------------------------------- sRGB <-> OKLab (Ottosson 2020)

def _to_linear(c: float) -> float:
    return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4


def _to_srgb(c: float) -> float:
    v = 12.92 * c if c <= 0.0031308 else 1.055 * c ** (1.0 / 2.4) - 0.055
    return min(1.0, max(0.0, v))


def srgb_to_oklab(rgb: tuple[float, float, float]) -> tuple[float, float, float]:
    """(r, g, b) in 0..1 (sRGB) -> (L, a, b) OKLab."""
    r, g, b = (_to_linear(c) for c in rgb)
    l_ = math.cbrt(0.4122214708 * r + 0.5363325363 * g + 0.0514459929 * b)
    m_ = math.cbrt(0.2119034982 * r + 0.6806995451 * g + 0.1073969566 * b)
    s_ = math.cbrt(0.0883024619 * r + 0.2817188376 * g + 0.6299787005 * b)
    return (0.2104542553 * l_ + 0.793617785 * m_ - 0.0040720468 * s_,
            1.9779984951 * l_ - 2.428592205 * m_ + 0.4505937099 * s_,
            0.0259040371 * l_ + 0.7827717662 * m_ - 0.808675766 * s_)


def oklab_to_srgb(lab: tuple[float, float, float]) -> tuple[float, float, float]:
    """(L, a, b) OKLab -> (r, g, b) in 0..1 (sRGB, clamped to the gamut)."""
    L, a, b = lab
    l_ = (L + 0.3963377774 * a + 0.2158037573 * b) ** 3
    m_ = (L - 0.1055613458 * a - 0.0638541728 * b) ** 3
    s_ = (L - 0.0894841775 * a - 1.291485548 * b) ** 3
    return (_to_srgb(4.0767416621 * l_ - 3.3077115913 * m_ + 0.2309699292 * s_),
            _to_srgb(-1.2684380046 * l_ + 2.6097574011 * m_ - 0.3413193965 * s_),
            _to_srgb(-0.0041960863 * l_ - 0.7034186147 * m_ + 1.707614701 * s_))


def hex_to_rgb01(text: str) -> tuple[float, float, float]:
    n = int(text[1:], 16)
    return ((n >> 16 & 255) / 255.0, (n >> 8 & 255) / 255.0, (n & 255) / 255.0)


def rgb_to_hex(rgb: tuple[int, int, int]) -> str:
    return "#{:02x}{:02x}{:02x}".format(*rgb)


# ----------------------------------------------------------------------------- tables

def build_table(anchors: tuple[str, ...], count: int = DATA_LEVELS) -> list[tuple[int, int, int]]:
    """`count` (r, g, b) 0..255 entries spaced at equal OKLab distance along the anchors' path."""
    labs = [srgb_to_oklab(hex_to_rgb01(h)) for h in anchors]
    cumulative = [0.0]
    for k in range(1, len(labs)):
        cumulative.append(cumulative[-1] + math.dist(labs[k - 1], labs[k]))
    total = cumulative[-1]
    out = []
    seg = 1
    for n in range(count):
        target = total * n / (count - 1)
        while seg < len(labs) - 1 and cumulative[seg] < target:
            seg += 1
        span = (cumulative[seg] - cumulative[seg - 1]) or 1.0
        t = min(1.0, max(0.0, (target - cumulative[seg - 1]) / span))
        p, q = labs[seg - 1], labs[seg]
        rgb = oklab_to_srgb(tuple(p[i] + t * (q[i] - p[i]) for i in range(3)))
        out.append(tuple(int(math.floor(c * 255.0 + 0.5)) for c in rgb))
    return out


@lru_cache(maxsize=None)
def table(name: str) -> tuple[tuple[int, int, int], ...]:
    """The 255-entry table of a map by name."""
    if name not in MAP_ANCHORS:
        raise ValueError(f"colour map {name!r} is not one of: {', '.join(MAP_ANCHORS)}")
    return tuple(build_table(MAP_ANCHORS[name]))


def view_map(view: str) -> str:
    """The map a view is drawn with by default."""
    return VIEW_MAPS.get(view, "kiln")


def value_fraction(name: str, value: float, vmin: float, vmax: float) -> float:
    """Where a value falls on a map, 0..1, for a range [vmin, vmax]; a diverging map keeps zero in the middle
    when the range straddles zero (the page does the same)."""
    if name in DIVERGING and vmin < 0.0 < vmax:
        f = 0.5 + value / (2.0 * max(-vmin, vmax))
    else:
        f = (value - vmin) / (vmax - vmin) if vmax > vmin else 0.5
    return min(1.0, max(0.0, f))


def colour_at(name: str, f: float) -> tuple[int, int, int]:
    """The (r, g, b) 0..255 entry at fraction f in 0..1 of a map (nearest entry, as the page picks it)."""
    t = table(name)
    return t[int(math.floor(min(1.0, max(0.0, f)) * (len(t) - 1) + 0.5))]


def for_page() -> dict:
    """What the page needs: every map's table as hex colours, which maps diverge, each view's map, the wall."""
    return {"maps": [{"name": n, "diverging": n in DIVERGING, "colours": [rgb_to_hex(c) for c in table(n)]}
                     for n in MAP_ANCHORS],
            "views": dict(VIEW_MAPS), "wall": rgb_to_hex(WALL_RGB)}


def matplotlib_map(name: str):
    """A matplotlib ListedColormap of the same table; invalid values (walls, no gas) take the wall colour."""
    from matplotlib.colors import ListedColormap

    cmap = ListedColormap([tuple(c / 255.0 for c in rgb) for rgb in table(name)], name=f"shockslate-{name}")
    return cmap.with_extremes(bad=tuple(c / 255.0 for c in WALL_RGB))


def matplotlib_map_for_view(view: str):
    """The ListedColormap a report image of `view` uses: the view's own map, as on the page."""
    return matplotlib_map(view_map(view))
