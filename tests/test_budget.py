"""The class decision rule, worked out by hand on invented numbers."""

import pytest

from dct.budget import Measure, Targets, decide_class, pareto_frontier, summarize
from dct.tables import Setting

S1, S2, S3 = Setting(30), Setting(50), Setting(40, 20)
CURRENT = Setting(85)


def table(chroma_c_s1=0.99, local_b_s3=0.9):
    """Three images, four settings. Numbers invented for the hand calculation below."""
    m = lambda b, s, cb=0.99, cr=0.99, loc=0.9: Measure(b, s, cb, cr, loc)
    return {
        "A": {S1: m(100, 0.93), S2: m(150, 0.955), S3: m(130, 0.951), CURRENT: m(300, 0.99)},
        "B": {S1: m(120, 0.96), S2: m(170, 0.97), S3: m(125, 0.949, loc=local_b_s3), CURRENT: m(320, 0.99)},
        "C": {S1: m(90, 0.95, cb=chroma_c_s1), S2: m(140, 0.96), S3: m(120, 0.96), CURRENT: m(280, 0.99)},
    }


def test_coverage_of_all_images_picks_the_only_setting_all_accept():
    # target 0.95: S1 accepted by B, C (2/3); S2 by all (3/3, 460 bytes); S3 by A, C (2/3).
    # coverage 0.9 needs ceil(0.9 * 3) = 3 images -> S2, the only one; current = 900 bytes.
    d = decide_class(table(), Targets(0.95, 0.9, local_floor=0), current=CURRENT)
    assert d.setting == S2
    assert d.summary.total_bytes == 460 and d.summary.share_accepting == 1.0
    assert d.summary.ssim_min == pytest.approx(0.955)
    assert d.savings_vs_current == pytest.approx(1 - 460 / 900)


def test_lower_coverage_picks_the_cheapest_setting_two_accept():
    # coverage 0.6 needs 2 images: S1 (310 bytes) and S3 (375) qualify; S1 is cheaper.
    d = decide_class(table(), Targets(0.95, 0.6, local_floor=0), current=CURRENT)
    assert d.setting == S1 and d.summary.total_bytes == 310
    assert d.summary.share_accepting == pytest.approx(2 / 3)


def test_chroma_floor_rejects_colour_damage():
    # C's Cb SSIM at S1 is 0.90 < floor 0.95, so S1 falls to 1/3; S3 (375) is next.
    d = decide_class(table(chroma_c_s1=0.90), Targets(0.95, 0.6, local_floor=0), current=CURRENT)
    assert d.setting == S3
    # With the chroma floor lowered to 0.9, S1 is back.
    d = decide_class(table(chroma_c_s1=0.90), Targets(0.95, 0.6, chroma_floor=0.9, local_floor=0))
    assert d.setting == S1


def test_local_floor():
    # Local SSIM of every image is 0.9; a local floor of 0.95 rejects everything...
    d = decide_class(table(), Targets(0.95, 0.6, local_floor=0.95))
    assert d.setting is None and d.best_share is not None
    # ...and 0 turns the check off.
    assert decide_class(table(), Targets(0.95, 0.6, local_floor=0)).setting == S1


def test_unreachable_target_says_so():
    d = decide_class(table(), Targets(0.999, 0.9, local_floor=0), current=CURRENT)
    assert d.setting is None and d.summary is None and d.savings_vs_current is None
    assert d.best_share.setting == CURRENT  # the closest: all images at 0.99


def test_frontier_and_coverage_quantile():
    t = Targets(0.95, 0.6, local_floor=0)
    sums = [summarize(s, [table()[k][s] for k in "ABC"], t) for s in (S1, S2, S3, CURRENT)]
    # coverage 0.6 -> the 2nd best SSIM: S1 0.95, S3 0.951, S2 0.96, current 0.99.
    assert [round(s.ssim_at_coverage, 3) for s in sums] == [0.95, 0.96, 0.951, 0.99]
    front = pareto_frontier(sums)
    assert [s.setting for s in front] == [S1, S3, S2, CURRENT]


def test_bad_targets():
    with pytest.raises(ValueError, match="target_ssim must be a number in"):
        Targets(1.5)
    with pytest.raises(ValueError, match="coverage must be a number in"):
        Targets(0.9, 0)
    with pytest.raises(ValueError, match="a class needs at least one image"):
        decide_class({}, Targets())
