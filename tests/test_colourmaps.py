"""The colour maps the page and the report images share (solver/colourmaps.py)."""
from __future__ import annotations

import math

import pytest

from shockslate.solver import colourmaps as cm
from shockslate.solver.fields import VIEWS


def test_oklab_of_reference_colours():
    # sRGB white is L = 1, a = b = 0 (Ottosson 2020, the OKLab definition: white maps to L = 1, no chroma)
    assert cm.srgb_to_oklab((1.0, 1.0, 1.0)) == pytest.approx((1.0, 0.0, 0.0), abs=1e-4)
    # sRGB red is oklab(0.628 0.2249 0.1258) (CSS Color Module Level 4 examples; from memory, 3 to 4 digits)
    assert cm.srgb_to_oklab((1.0, 0.0, 0.0)) == pytest.approx((0.628, 0.2249, 0.1258), abs=1e-3)
    for rgb in ((0.2, 0.4, 0.6), (0.9, 0.1, 0.3), (0.05, 0.05, 0.05)):
        assert cm.oklab_to_srgb(cm.srgb_to_oklab(rgb)) == pytest.approx(rgb, abs=1e-6)


@pytest.mark.parametrize("name", list(cm.MAP_ANCHORS))
def test_maps_step_evenly_in_oklab(name):
    """Even steps in OKLab (Ottosson 2020): the OKLab path length over each run of 16 neighbouring levels
    is the same within 15% along the whole map (single steps are about 0.0035 and 8-bit rounding moves
    each entry by up to about 0.002, so runs are compared). Sequential maps rise in lightness; the
    diverging map is lightest in the middle. Common practice for perceptual maps, thresholds our own."""
    labs = [cm.srgb_to_oklab(tuple(c / 255.0 for c in rgb)) for rgb in cm.table(name)]
    assert len(labs) == cm.DATA_LEVELS
    runs = [sum(math.dist(labs[j], labs[j - 1]) for j in range(k - 15, k + 1)) for k in range(16, len(labs), 16)]
    mean = sum(runs) / len(runs)
    assert max(abs(r - mean) for r in runs) / mean < 0.15
    L = [lab[0] for lab in labs]
    smooth = [sum(L[k - 2:k + 3]) / 5 for k in range(2, len(L) - 2)]
    if name in cm.DIVERGING:
        assert 0.4 < L.index(max(L)) / (len(L) - 1) < 0.6
    else:
        assert all(smooth[k] >= smooth[k - 8] for k in range(8, len(smooth), 8))


def test_ends_are_the_anchor_colours():
    for name, anchors in cm.MAP_ANCHORS.items():
        first, last = cm.table(name)[0], cm.table(name)[-1]
        assert first == tuple(round(c * 255) for c in cm.hex_to_rgb01(anchors[0]))
        assert last == tuple(round(c * 255) for c in cm.hex_to_rgb01(anchors[-1]))


def test_report_map_is_the_page_map_entry_for_entry():
    """matplotlib draws frame level k of a range with the table's entry k, as the page does."""
    for view in VIEWS:
        name = cm.view_map(view)
        cmap = cm.matplotlib_map_for_view(view)
        assert cmap.name == f"shockslate-{name}"
        for k in (0, 1, 63, 127, 200, 253, 254):
            assert tuple(int(c) for c in cmap(k / 254, bytes=True)[:3]) == cm.table(name)[k]
        assert tuple(int(c) for c in cmap(float("nan"), bytes=True)[:3]) == cm.WALL_RGB


def test_every_view_has_a_map_and_the_page_gets_every_table():
    sent = cm.for_page()
    assert set(sent["views"]) == set(VIEWS)
    assert [m["name"] for m in sent["maps"]] == list(cm.MAP_ANCHORS)
    for m in sent["maps"]:
        assert len(m["colours"]) == cm.DATA_LEVELS and m["diverging"] == (m["name"] in cm.DIVERGING)
    assert sent["wall"] == "#3a4048"


def test_diverging_map_keeps_zero_in_the_middle():
    assert cm.value_fraction("seesaw", 0.0, -1.0, 3.0) == 0.5
    assert cm.value_fraction("kiln", 0.0, -1.0, 3.0) == 0.25
