"""Tests for webapp.charts: nice ticks and the frontier SVG.

The SVG is parsed with xml.etree.ElementTree (so it must be well-formed XML); positions are checked
against the chart's own tick labels, which fixes the data -> pixel mapping independently of the code
that drew the markers.
"""

from __future__ import annotations

import math
import random
import xml.etree.ElementTree as ET

import pytest

from webapp.charts import frontier_svg, nice_ticks, setting_label, tick_decimals

SVG = "{http://www.w3.org/2000/svg}"


# --------------------------------------------------------------------------------------------------
# nice numbers


def test_nice_ticks_0_to_97():
    # Common practice: Heckbert, "Nice numbers for graph labels", Graphics Gems (1990), loose
    # labelling. range 97 -> nice 100; 100 / 5 = 20 -> nice 20; ends floor(0/20), ceil(97/20).
    assert nice_ticks(0, 97) == [0, 20, 40, 60, 80, 100]


def test_nice_ticks_ssim_range_worked_by_hand():
    # Heckbert's steps by hand: range 0.055 -> nice (not rounded) 0.1; 0.1 / 5 = 0.02 -> rounded
    # nice 0.02; floor(0.93 / 0.02) = 46 -> 0.92, ceil(0.985 / 0.02) = 50 -> 1.00.
    assert nice_ticks(0.93, 0.985) == [0.92, 0.94, 0.96, 0.98, 1.0]


def test_nice_ticks_count_changes_step():
    # Heckbert by hand, count 3: range 97 -> 100; 100 / 2 = 50 -> rounded nice 50 (5.0 < 7).
    assert nice_ticks(0, 97, count=3) == [0, 50, 100]
    # count 11: 100 / 10 = 10 -> 10.
    assert nice_ticks(0, 97, count=11) == [0, 10, 20, 30, 40, 50, 60, 70, 80, 90, 100]


@pytest.mark.parametrize("seed", range(5))
def test_nice_ticks_properties(seed):
    # Properties of loose labelling (Heckbert 1990): a constant step of 1, 2 or 5 times a power of
    # ten, ticks on multiples of the step, and the first/last ticks enclosing the data.
    rng = random.Random(seed)
    for _ in range(200):
        lo = rng.uniform(-1e4, 1e4) * 10 ** rng.randint(-6, 2)
        # Spans down to a millionth of the magnitude: finer ones run into float64 rounding.
        hi = lo + max(abs(rng.gauss(0, 1)) * 10 ** rng.randint(-6, 4), abs(lo) * 1e-6, 1e-9)
        count = rng.randint(2, 10)
        ticks = nice_ticks(lo, hi, count=count)
        assert ticks[0] <= lo and ticks[-1] >= hi, (lo, hi, ticks)
        step = ticks[1] - ticks[0]
        mantissa = step / 10 ** math.floor(math.log10(step))
        nice = [m for m in (1, 2, 5, 10) if math.isclose(mantissa, m, rel_tol=1e-6)]
        assert nice, (step, ticks)
        step = nice[0] * 10 ** math.floor(math.log10(step))
        for a, b in zip(ticks, ticks[1:]):
            assert math.isclose(b - a, step, rel_tol=1e-6, abs_tol=1e-12)
        k = ticks[0] / step
        assert math.isclose(k, round(k), rel_tol=1e-9, abs_tol=1e-6)
        # Loose labelling overshoots the range by less than one step at each end.
        assert lo - ticks[0] < step * (1 + 1e-9) and ticks[-1] - hi < step * (1 + 1e-9)


def test_nice_ticks_zero_range_gets_an_axis():
    for v in (0.0, 5.0, 0.95, -3.0):
        ticks = nice_ticks(v, v)
        assert len(ticks) >= 3 and ticks[0] < v < ticks[-1], (v, ticks)


def test_nice_ticks_rejects_bad_input():
    with pytest.raises(ValueError, match="nan"):
        nice_ticks(float("nan"), 1)
    with pytest.raises(ValueError, match="lo=2.0"):
        nice_ticks(2, 1)
    with pytest.raises(ValueError, match="count"):
        nice_ticks(0, 1, count=1)
    with pytest.raises(ValueError, match="'a'"):
        nice_ticks("a", 1)


def test_tick_decimals():
    # Heckbert's nfrac = max(-floor(log10(step)), 0).
    assert tick_decimals(20) == 0
    assert tick_decimals(1) == 0
    assert tick_decimals(0.5) == 1
    assert tick_decimals(0.02) == 2
    assert tick_decimals(0.005) == 3
    with pytest.raises(ValueError, match="0"):
        tick_decimals(0)


# --------------------------------------------------------------------------------------------------
# frontier chart

N_IMAGES = 24


def _fp(q, k, ss, kb, ssim):
    return {"quality": q, "cutoff": k, "subsampling": ss, "estimated_bytes": kb * 1000 * N_IMAGES, "ssim": ssim}


FRONTIER = [
    _fp(30, 20, "4:2:0", 18.8, 0.866),
    _fp(40, 24, "4:2:0", 25.3, 0.903),
    _fp(50, 28, "4:2:0", 33.5, 0.930),
    _fp(58, 28, "4:2:0", 40.7, 0.944),
    _fp(62, 28, "4:2:0", 44.7, 0.951),
    _fp(70, 36, "4:2:0", 54.8, 0.962),
    _fp(78, 44, "4:2:0", 66.0, 0.972),
    _fp(90, 64, "4:4:4", 92.0, 0.986),
]


def _entry(**overrides):
    entry = {
        "name": "Product detail hero",
        "width": 1600,
        "image_count": N_IMAGES,
        "target_ssim": 0.95,
        "setting": {"quality": 62, "cutoff": 28, "subsampling": "4:2:0"},
        "estimated_bytes": FRONTIER[4]["estimated_bytes"],
        "ssim_min": 0.93,
        "current_bytes": 70_000 * N_IMAGES,
        "current_point": {"quality": 82, "cutoff": 64, "subsampling": "4:2:0",
                          "estimated_bytes": 70_000 * N_IMAGES, "ssim": 0.962},
        "chosen_point": dict(FRONTIER[4]),
        "frontier": [dict(p) for p in FRONTIER],
    }
    entry.update(overrides)
    return entry


def _parse(svg: str) -> ET.Element:
    return ET.fromstring(svg)  # raises on malformed XML


def _by_class(root, cls):
    return [el for el in root.iter() if el.get("class") == cls]


def _scales(root):
    """Data -> pixel maps recovered from the tick labels (two ticks fix a linear map)."""
    xt = [(float(t.get("data-value")), float(t.get("x"))) for t in _by_class(root, "fc-x-tick")]
    yt = [(float(t.get("data-value")), float(t.get("y")) - 4) for t in _by_class(root, "fc-y-tick")]
    (xv0, xp0), (xv1, xp1) = xt[0], xt[-1]
    (yv0, yp0), (yv1, yp1) = yt[0], yt[-1]
    return (lambda v: xp0 + (v - xv0) * (xp1 - xp0) / (xv1 - xv0),
            lambda v: yp0 + (v - yv0) * (yp1 - yp0) / (yv1 - yv0))


def _diamond_centre(el):
    return float(el.get("data-cx")), float(el.get("data-cy"))


def test_svg_is_standalone_and_accessible():
    svg = frontier_svg(_entry())
    root = _parse(svg)
    assert root.tag == SVG + "svg"
    assert root.get("viewBox") == "0 0 560 300"
    assert root.get("role") == "img"
    assert "Product detail hero" in root.get("aria-label")
    title = root.find(SVG + "title")
    assert title is not None and "Product detail hero" in title.text
    # No script, no external resources, no ids or <style> that could clash on a page with several charts.
    banned = {SVG + "script", SVG + "style", SVG + "image", SVG + "foreignObject"}
    assert not any(el.tag in banned for el in root.iter())
    for el in root.iter():
        assert "id" not in el.attrib
        assert not any(k.endswith("href") for k in el.attrib)
        assert not any(k.startswith("on") for k in el.attrib)


def test_viewbox_follows_size():
    root = _parse(frontier_svg(_entry(), width=800, height=420))
    assert root.get("viewBox") == "0 0 800 420"
    with pytest.raises(ValueError, match="100"):
        frontier_svg(_entry(), width=100)
    with pytest.raises(ValueError, match="class_entry"):
        frontier_svg(["not", "a", "dict"])


def test_marker_counts():
    root = _parse(frontier_svg(_entry()))
    assert len(_by_class(root, "fc-frontier-point")) == len(FRONTIER)
    assert len(_by_class(root, "fc-chosen-point")) == 1
    assert len(_by_class(root, "fc-current-point")) == 1
    assert len(_by_class(root, "fc-target-line")) == 1
    assert len(_by_class(root, "fc-frontier-line")) == 1
    assert _by_class(root, "fc-note") == []


def test_marker_positions_follow_the_axes():
    root = _parse(frontier_svg(_entry()))
    sx, sy = _scales(root)
    circles = _by_class(root, "fc-frontier-point")
    # Mean KB per image = class total / image count / 1000.
    expected = sorted((p["estimated_bytes"] / N_IMAGES / 1000, p["ssim"]) for p in FRONTIER)
    for circle, (kb, ssim) in zip(circles, expected):
        assert float(circle.get("cx")) == pytest.approx(sx(kb), abs=0.02)
        assert float(circle.get("cy")) == pytest.approx(sy(ssim), abs=0.02)
    # Monotone mapping: more KB is further right, higher SSIM is higher up (smaller y).
    cx = [float(c.get("cx")) for c in circles]
    cy = [float(c.get("cy")) for c in circles]
    assert cx == sorted(cx) and len(set(cx)) == len(cx)
    assert cy == sorted(cy, reverse=True)
    # Chosen and current markers.
    x, y = _diamond_centre(_by_class(root, "fc-chosen-point")[0])
    assert x == pytest.approx(sx(44.7), abs=0.02) and y == pytest.approx(sy(0.951), abs=0.02)
    rect = _by_class(root, "fc-current-point")[0]
    rx = float(rect.get("x")) + float(rect.get("width")) / 2
    ry = float(rect.get("y")) + float(rect.get("height")) / 2
    assert rx == pytest.approx(sx(70.0), abs=0.02) and ry == pytest.approx(sy(0.962), abs=0.02)
    assert rx > x  # the current default is the bigger file


def test_target_line_matches_scale():
    root = _parse(frontier_svg(_entry(target_ssim=0.97)))
    _, sy = _scales(root)
    line = _by_class(root, "fc-target-line")[0]
    assert float(line.get("y1")) == pytest.approx(sy(0.97), abs=0.02)
    assert line.get("y1") == line.get("y2")
    assert line.get("stroke-dasharray")
    assert _by_class(root, "fc-target-label")[0].text == "target 0.97"


def test_labels():
    root = _parse(frontier_svg(_entry()))
    assert _by_class(root, "fc-chosen-label")[0].text == "q62 \u00b7 k28 \u00b7 4:2:0"
    assert _by_class(root, "fc-current-label")[0].text == "current"
    assert _by_class(root, "fc-target-label")[0].text == "target 0.95"
    assert setting_label({"quality": 62, "cutoff": 28, "subsampling": "4:2:0"}) == "q62 \u00b7 k28 \u00b7 4:2:0"


def test_labels_stay_inside_the_picture():
    for entry in (_entry(), _entry(target_ssim=0.99), _entry(setting=None, chosen_point=None)):
        root = _parse(frontier_svg(entry))
        for el in root.iter(SVG + "text"):
            if el.get("transform"):
                continue
            x, y = float(el.get("x")), float(el.get("y"))
            assert 0 <= x <= 560 and 0 <= y <= 300, (el.get("class"), x, y)


def test_axes_have_titles_and_ssim_stays_at_most_1():
    root = _parse(frontier_svg(_entry()))
    assert _by_class(root, "fc-x-title")[0].text == "Estimated KB per image"
    assert _by_class(root, "fc-y-title")[0].text == "SSIM"
    y_values = [float(t.get("data-value")) for t in _by_class(root, "fc-y-tick")]
    assert max(y_values) <= 1.0
    # Tick labels printed with the step's decimals (Heckbert's nfrac).
    texts = [t.text for t in _by_class(root, "fc-y-tick")]
    assert all(len(s.split(".")[1]) == len(texts[0].split(".")[1]) for s in texts)


def test_class_name_is_escaped():
    evil = '<script>alert("x")</script> & \'banners\'\x07'
    svg = frontier_svg(_entry(name=evil))
    assert "<script>" not in svg and "</script>" not in svg
    assert "&lt;script&gt;" in svg
    root = _parse(svg)
    assert not any(el.tag == SVG + "script" for el in root.iter())
    heading = _by_class(root, "fc-heading")[0].text
    assert heading.startswith('<script>alert("x")</script> &')  # round-trips as text
    assert "\x07" not in svg  # XML 1.0 forbids it even escaped
    assert '<script>alert("x")</script> & \'banners\'' in root.get("aria-label")


def test_long_name_is_shortened_on_screen_only():
    name = "Seasonal campaign banner, full-bleed, autumn collection " * 3
    root = _parse(frontier_svg(_entry(name=name)))
    heading = _by_class(root, "fc-heading")[0].text
    assert heading.endswith("\u2026") and len(heading) < len(name)
    assert name.strip() in root.find(SVG + "title").text


def test_target_unmet_shows_a_note():
    root = _parse(frontier_svg(_entry(setting=None, chosen_point=None, target_ssim=0.995)))
    assert _by_class(root, "fc-chosen-point") == []
    assert _by_class(root, "fc-chosen-label") == []
    note = _by_class(root, "fc-note")
    assert len(note) == 1 and "0.995" in note[0].text
    assert len(_by_class(root, "fc-frontier-point")) == len(FRONTIER)


def test_single_frontier_point():
    entry = _entry(frontier=[dict(FRONTIER[4])], current_point=None, current_bytes=None)
    root = _parse(frontier_svg(entry))
    assert len(_by_class(root, "fc-frontier-point")) == 1
    assert _by_class(root, "fc-frontier-line") == []
    sx, sy = _scales(root)
    c = _by_class(root, "fc-frontier-point")[0]
    assert float(c.get("cx")) == pytest.approx(sx(44.7), abs=0.02)


def test_equal_values_zero_range():
    same = _fp(50, 64, "4:2:0", 40.0, 0.95)
    entry = _entry(frontier=[dict(same) for _ in range(3)], chosen_point=dict(same),
                   current_point=None, current_bytes=None, target_ssim=0.95)
    svg = frontier_svg(entry)
    root = _parse(svg)
    assert "nan" not in svg.lower() and "inf" not in svg.lower()
    x_values = [float(t.get("data-value")) for t in _by_class(root, "fc-x-tick")]
    y_values = [float(t.get("data-value")) for t in _by_class(root, "fc-y-tick")]
    assert x_values[0] < 40.0 < x_values[-1]
    assert y_values[0] < 0.95 < y_values[-1] <= 1.0
    sx, sy = _scales(root)
    for c in _by_class(root, "fc-frontier-point"):
        assert float(c.get("cx")) == pytest.approx(sx(40.0), abs=0.02)
        assert float(c.get("cy")) == pytest.approx(sy(0.95), abs=0.02)


def test_all_ssim_exactly_one():
    p = _fp(95, 64, "4:4:4", 120.0, 1.0)
    root = _parse(frontier_svg(_entry(frontier=[p], chosen_point=p, target_ssim=1.0,
                                      current_point=None, current_bytes=None)))
    y_values = [float(t.get("data-value")) for t in _by_class(root, "fc-y-tick")]
    assert y_values[-1] == 1.0 and y_values[0] < 1.0


def test_fallbacks_without_points():
    entry = _entry()
    del entry["chosen_point"]
    del entry["current_point"]
    root = _parse(frontier_svg(entry))
    sx, sy = _scales(root)
    # Chosen falls back to the frontier point with the chosen setting.
    x, y = _diamond_centre(_by_class(root, "fc-chosen-point")[0])
    assert x == pytest.approx(sx(44.7), abs=0.02) and y == pytest.approx(sy(0.951), abs=0.02)
    # Current: only the size is known, so it is a vertical line at that size.
    assert _by_class(root, "fc-current-point") == []
    line = _by_class(root, "fc-current-line")[0]
    assert float(line.get("x1")) == pytest.approx(sx(70.0), abs=0.02)
    assert _by_class(root, "fc-current-label")[0].text == "current"


def test_fallback_to_class_totals_when_setting_is_off_the_frontier():
    entry = _entry(setting={"quality": 64, "cutoff": 30, "subsampling": "4:2:0"},
                   estimated_bytes=46_000 * N_IMAGES, ssim_min=0.948)
    del entry["chosen_point"]
    root = _parse(frontier_svg(entry))
    sx, sy = _scales(root)
    x, y = _diamond_centre(_by_class(root, "fc-chosen-point")[0])
    assert x == pytest.approx(sx(46.0), abs=0.02) and y == pytest.approx(sy(0.948), abs=0.02)
    assert _by_class(root, "fc-chosen-label")[0].text == "q64 \u00b7 k30 \u00b7 4:2:0"


def test_malformed_points_are_skipped():
    bad = [{"quality": 10}, "junk", None, {"estimated_bytes": float("nan"), "ssim": 0.9},
           {"estimated_bytes": "12", "ssim": 0.9}, {"estimated_bytes": 1000, "ssim": True}]
    root = _parse(frontier_svg(_entry(frontier=[dict(p) for p in FRONTIER] + bad)))
    assert len(_by_class(root, "fc-frontier-point")) == len(FRONTIER)


def test_without_image_count_axis_shows_class_totals():
    entry = _entry()
    del entry["image_count"]
    root = _parse(frontier_svg(entry))
    assert _by_class(root, "fc-x-title")[0].text == "Estimated KB (class total)"
    sx, _ = _scales(root)
    c = _by_class(root, "fc-frontier-point")[0]
    assert float(c.get("cx")) == pytest.approx(sx(18.8 * N_IMAGES), abs=0.02)


def test_empty_class_renders_a_note():
    root = _parse(frontier_svg({"name": "empty", "frontier": []}))
    assert _by_class(root, "fc-frontier-point") == []
    assert "No size/SSIM data" in _by_class(root, "fc-note")[0].text
    root = _parse(frontier_svg({}))
    assert len(_by_class(root, "fc-note")) == 1


def test_rejected_frontier_points_are_hollow():
    # The frontier is drawn on luma SSIM; points the decision rejects (a floor or the coverage) are
    # hollow and say so in their tooltip, the others stay filled.
    import xml.etree.ElementTree as ET

    from webapp.charts import frontier_svg

    entry = {
        "name": "banner", "image_count": 2, "target_ssim": 0.95,
        "setting": {"quality": 80, "cutoff": 64, "subsampling": "4:4:4"},
        "frontier": [
            {"quality": 60, "cutoff": 64, "subsampling": "4:2:0", "estimated_bytes": 100_000, "ssim": 0.96, "qualifies": False},
            {"quality": 80, "cutoff": 64, "subsampling": "4:4:4", "estimated_bytes": 150_000, "ssim": 0.97, "qualifies": True},
        ],
    }
    root = ET.fromstring(frontier_svg(entry))
    circles = [c for c in root.iter("{http://www.w3.org/2000/svg}circle") if "fc-frontier-point" in c.get("class", "")]
    assert len(circles) == 2
    hollow = [c for c in circles if "fc-rejected" in c.get("class")]
    assert len(hollow) == 1 and hollow[0].get("fill") == "#ffffff"
    assert "rejected" in hollow[0].find("{http://www.w3.org/2000/svg}title").text


def test_target_labels_are_never_rounded_into_another_value():
    from webapp.charts import _format_target, frontier_svg

    assert _format_target(0.99999) == "0.99999" and _format_target(0.95) == "0.95" and _format_target(0.9) == "0.90"
    entry = {"name": "x", "width": None, "image_count": 1, "target_ssim": 0.99999, "setting": None,
             "estimated_bytes": None, "ssim_min": None, "chosen_point": None, "current_point": None,
             "frontier": [{"quality": 50, "cutoff": 64, "subsampling": "4:2:0", "estimated_bytes": 1000,
                           "ssim": 0.97, "qualifies": False}]}
    svg = frontier_svg(entry)
    assert "0.99999" in svg and "target 1.00" not in svg and "SSIM 1.00 " not in svg
