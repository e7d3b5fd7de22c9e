"""SSIM against scikit-image and the settings of Wang, Bovik, Sheikh & Simoncelli (2004)."""

import numpy as np
import pytest
from scipy import ndimage
from skimage import data
from skimage.metrics import structural_similarity

from dct import quality


def skimage_ssim(x, y, full=False):
    # The paper's settings as scikit-image exposes them (Gaussian window sigma 1.5, K1 0.01, K2 0.03, L 255).
    return structural_similarity(
        x.astype(np.float64), y.astype(np.float64), gaussian_weights=True, sigma=1.5,
        use_sample_covariance=False, data_range=255, full=full,
    )


def distorted_pairs():
    rng = np.random.default_rng(11)
    cam = data.camera().astype(np.float64)
    green = data.astronaut()[..., 1].astype(np.float64)[:301, :413]  # odd sizes
    yield cam, np.clip(cam + rng.normal(0, 10, cam.shape), 0, 255)
    yield green, ndimage.gaussian_filter(green, 2.0)
    yield green, np.clip(green * 0.8 + 30, 0, 255)
    yield cam[:128, :256], np.round(cam[:128, :256] / 16) * 16  # power-of-two width


@pytest.mark.parametrize("pair", list(distorted_pairs()), ids=["noise", "blur", "contrast", "posterize"])
def test_equals_scikit_image(pair):
    x, y = pair
    ref_mean, ref_map = skimage_ssim(x, y, full=True)
    ours = quality.ssim(x, y, want_map=True)
    # Tolerances: the mean within 1e-5 and every map value within 1e-4 of scikit-image 0.26's
    # float64 result (we filter in float32 through OpenCV).
    assert abs(ours.ssim - ref_mean) < 1e-5
    np.testing.assert_allclose(ours.ssim_map, ref_map, atol=1e-4)


def test_reference_statistics_are_reused_consistently():
    x = data.camera().astype(np.float64)
    ref = quality.ReferenceStats(x)
    for sigma in (0.5, 1.5):
        y = ndimage.gaussian_filter(x, sigma)
        assert abs(ref.compare(y).ssim - skimage_ssim(x, y)) < 1e-5


def test_identical_images():
    x = data.camera()
    r = quality.ssim(x, x)
    assert r.ssim == pytest.approx(1.0, abs=1e-6) and r.psnr == float("inf")


def test_psnr_definition():
    # PSNR = 10 log10(255^2 / MSE): a uniform error of 5 levels gives MSE 25.
    x = np.full((32, 32), 100.0)
    assert quality.ssim(x, x + 5).psnr == pytest.approx(10 * np.log10(255**2 / 25))


@pytest.mark.parametrize("shape", [(70, 97), (128, 128), (11, 300)])
def test_window_filter_equals_scipy(shape):
    # scipy.ndimage.gaussian_filter(sigma=1.5, truncate=3.5, mode="reflect") is what scikit-image uses.
    rng = np.random.default_rng(5)
    img = rng.random(shape) * 255
    ref = ndimage.gaussian_filter(img, 1.5, truncate=3.5, mode="reflect")
    # OpenCV's BORDER_REFLECT repeats the edge sample (d c b a | a b c d), as scipy's "reflect" does.
    np.testing.assert_allclose(quality.gaussian_filter(img), ref, atol=1e-4)


def test_worst_regions_find_planted_damage():
    m = np.ones((300, 400))
    m[200:240, 50:90] = 0.2  # the worst spot
    m[20:60, 300:340] = 0.6  # the second
    regions = quality.worst_regions(m, count=3, size=64)
    assert len(regions) == 3
    top, left, h, w, mean = regions[0]
    assert top <= 200 and top + h >= 240 and left <= 50 and left + w >= 90
    t2, l2, *_ = regions[1]
    assert t2 <= 20 + 40 and l2 + 64 >= 340 - 10
    assert regions[0][4] < regions[1][4] <= regions[2][4]


def test_too_small_for_the_window():
    with pytest.raises(ValueError, match="at least 11x11 pixels"):
        quality.ReferenceStats(np.zeros((10, 40)))


def test_dark_flat_areas_equal_scikit_image():
    # Near-black flat areas are where SSIM is most sensitive (C1 and C2 dominate): a dark UI card
    # with light text, decoded with one-level errors on the black, as a JPEG decoder may leave them.
    rng = np.random.default_rng(3)
    x = np.zeros((300, 280))
    x[40:60, 20:260] = 230  # a line of "text"
    x[120:200, 30:250] = rng.integers(0, 255, (80, 220))  # a photo block
    y = x.copy()
    y[x == 0] = rng.integers(0, 2, int((x == 0).sum()))
    y[120:200, 30:250] = np.clip(y[120:200, 30:250] + rng.normal(0, 6, (80, 220)), 0, 255).round()
    ref_mean, ref_map = skimage_ssim(x, y, full=True)
    ours = quality.ssim(x, y, want_map=True)
    assert abs(ours.ssim - ref_mean) < 1e-5
    np.testing.assert_allclose(ours.ssim_map, ref_map, atol=1e-4)


def test_strips_join_seamlessly():
    # A plane taller than several strips gives the same map as scikit-image across strip seams.
    rng = np.random.default_rng(8)
    x = ndimage.gaussian_filter(rng.random((quality.STRIP * 2 + 37, 90)) * 255, 1.0)
    y = np.clip(x + rng.normal(0, 4, x.shape), 0, 255)
    ref_mean, ref_map = skimage_ssim(x, y, full=True)
    ours = quality.ssim(x, y, want_map=True)
    assert abs(ours.ssim - ref_mean) < 1e-5
    np.testing.assert_allclose(ours.ssim_map, ref_map, atol=1e-4)
    assert ours.tile_means.shape == (-(-x.shape[0] // 16), -(-x.shape[1] // 16))


def test_recomputed_reference_statistics_give_the_same_ssim():
    """Large planes recompute their mean and variance per strip (bounded memory): same numbers."""
    from dct.quality import ReferenceStats

    rng = np.random.default_rng(11)
    ref = rng.integers(0, 256, size=(300, 280)).astype(np.uint8)
    dist = np.clip(ref + rng.normal(0, 12, ref.shape), 0, 255).astype(np.uint8)
    kept = ReferenceStats(ref, keep_stats=True).compare(dist, want_map=True)
    recomputed = ReferenceStats(ref, keep_stats=False).compare(dist, want_map=True)
    assert kept.ssim == recomputed.ssim and kept.local == recomputed.local
    np.testing.assert_array_equal(kept.ssim_map, recomputed.ssim_map)


def test_tile_means_and_gathered_values_equal_the_maps_own():
    """Without a map, the kernel takes the tile means and the values at given pixels from each row
    as it makes it: they must be the full map's own (each 16 x 16 tile's mean, the partial tiles at
    the right and bottom over their own pixels; the map at those pixels), for kept statistics (one
    pass over the plane) and recomputed ones (strips)."""
    rng = np.random.default_rng(5)
    for shape, keep in [((300, 203), True), ((quality.STRIP * 2 + 37, 61), False), ((17, 33), True)]:
        x = rng.integers(0, 256, shape).astype(np.uint8)
        y = np.clip(x + rng.normal(0, 7, shape), 0, 255).astype(np.uint8)
        ref = quality.ReferenceStats(x, keep_stats=keep)
        at = np.sort(rng.choice(x.size, size=x.size // 9, replace=False))
        full = ref.compare(y, want_map=True)
        lean = ref.compare(y, at=at)
        t = quality.LOCAL_TILE
        m = full.ssim_map.astype(np.float64)
        want = np.array([[m[r : r + t, c : c + t].mean() for c in range(0, shape[1], t)] for r in range(0, shape[0], t)])
        np.testing.assert_allclose(lean.tile_means, want, rtol=1e-12, atol=0)
        np.testing.assert_array_equal(lean.tile_means, full.tile_means)
        np.testing.assert_array_equal(lean.values_at, full.ssim_map.reshape(-1)[at])
        assert (lean.ssim, lean.local, lean.psnr) == (full.ssim, full.local, full.psnr)


def test_mean_only_comparison_equals_the_full_one():
    """Without map, tiles or gathered values the map's rows are summed in a scratch row: the same
    mean and PSNR, to the bit, over several strips."""
    rng = np.random.default_rng(12)
    x = rng.integers(0, 256, size=(quality.STRIP * 2 + 19, 75)).astype(np.uint8)
    y = np.clip(x + rng.normal(0, 9, x.shape), 0, 255).astype(np.uint8)
    ref = quality.ReferenceStats(x)
    full = ref.compare(y, want_map=True)
    mean_only = ref.compare(y, want_local=False)
    assert mean_only.ssim == full.ssim and mean_only.psnr == full.psnr
    assert mean_only.ssim_map is None and mean_only.tile_means is None
