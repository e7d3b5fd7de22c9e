"""The whole simulation against Pillow/libjpeg: file size, SSIM of the real decode, and bad input.

The corpus is scikit-image's bundled sample images (an open dataset shipped with the package).
"""

import io

import numpy as np
import pytest
from PIL import Image
from skimage import data

import dct
from dct.color import rgb_to_ycbcr
from dct.quality import ReferenceStats

PILLOW_SUBSAMPLING = {"4:4:4": 0, "4:2:2": 1, "4:2:0": 2}


def corpus():
    return {
        "astronaut": data.astronaut(),
        "coffee": data.coffee(),
        "chelsea": data.chelsea(),
        "rocket": data.rocket(),
        "immunohistochemistry": data.immunohistochemistry(),
        "camera (grayscale)": data.camera(),
        "astronaut crop 301x197": np.ascontiguousarray(data.astronaut()[37:338, 11:208]),
    }


def pillow_encode(img, luma, chroma, subsampling, optimize=True):
    buf = io.BytesIO()
    tables = [luma.ravel().tolist()] if img.ndim == 2 else [luma.ravel().tolist(), chroma.ravel().tolist()]
    Image.fromarray(img).save(buf, "JPEG", qtables=tables, subsampling=PILLOW_SUBSAMPLING[subsampling], optimize=optimize)
    return buf.getvalue()


def test_size_equals_libjpeg(capsys):
    """Bytes vs Pillow's libjpeg with the same tables, subsampling and optimize=True/False: byte for byte."""
    errors, std_errors = [], []
    for name, img in corpus().items():
        prepared = dct.PreparedImage(img)
        modes = ["4:2:0"] if img.ndim == 2 else ["4:4:4", "4:2:2", "4:2:0"]
        for q in (30, 50, 75, 95):
            for cutoff in (64, 36, 15):
                for sub in modes:
                    setting = dct.Setting(q, cutoff, sub)
                    point = prepared.evaluate(setting, standard=True)
                    luma, chroma = setting.tables()
                    actual = len(pillow_encode(img, luma, chroma, sub))
                    standard = len(pillow_encode(img, luma, chroma, sub, optimize=False))
                    err = (point.estimated_bytes - actual) / actual
                    std_err = (point.standard_bytes - standard) / standard
                    errors.append(abs(err))
                    std_errors.append(abs(std_err))
                    assert point.estimated_bytes == actual, f"{name} {setting.label()}: {point.estimated_bytes} vs {actual}"
                    assert point.standard_bytes == standard, f"{name} {setting.label()} (standard tables)"
    with capsys.disabled():
        print(
            f"\n[size vs libjpeg, {len(errors)} cases] optimal tables: median {np.median(errors):.2%}, "
            f"max {np.max(errors):.2%}; standard tables: median {np.median(std_errors):.2%}, max {np.max(std_errors):.2%}"
        )


@pytest.mark.parametrize("name", ["astronaut", "coffee", "camera (grayscale)", "astronaut crop 301x197"])
@pytest.mark.parametrize("q, sub, cutoff", [(30, "4:2:0", 64), (75, "4:4:4", 20), (90, "4:2:2", 64)])
def test_ssim_matches_pillow_decode(name, q, sub, cutoff):
    """SSIM of our reconstruction vs SSIM of Pillow's actual decode of the same file (within 0.003)."""
    img = corpus()[name]
    sim = dct.simulate(img, q, sub, cutoff)
    luma, chroma = sim.tables
    decoded = np.asarray(Image.open(io.BytesIO(pillow_encode(img, luma, chroma, sub))))
    if img.ndim == 2:
        assert abs(sim.ssim - ReferenceStats(img).compare(decoded).ssim) <= 0.003
        return
    # libjpeg's own YCbCr planes (decoded without colour conversion): the decoder's luma and
    # upsampled chroma, before RGB rounding and clamping mix them.
    planes = Image.open(io.BytesIO(pillow_encode(img, luma, chroma, sub)))
    planes.draft("YCbCr", planes.size)
    dec = np.asarray(planes).astype(np.float32).transpose(2, 0, 1)
    orig = rgb_to_ycbcr(img)
    assert abs(sim.ssim - ReferenceStats(orig[0]).compare(dec[0]).ssim) <= 0.003
    assert abs(sim.ssim_cb - ReferenceStats(orig[1]).compare(dec[1]).ssim) <= 0.003
    assert abs(sim.ssim_cr - ReferenceStats(orig[2]).compare(dec[2]).ssim) <= 0.003
    # Luma of the RGB a browser shows agrees too.
    assert abs(sim.ssim - ReferenceStats(orig[0]).compare(rgb_to_ycbcr(decoded)[0]).ssim) <= 0.003
    # What a viewer sees: the reconstruction is close to libjpeg's decode pixel by pixel.
    assert np.abs(sim.reconstructed.astype(int) - decoded.astype(int)).mean() < 1.0


def test_chroma_ssim_sees_subsampling_damage():
    # Fine red/blue stripes: luma alone barely changes with subsampling, chroma SSIM drops.
    img = np.zeros((64, 64, 3), np.uint8)
    img[:, ::2] = (220, 30, 30)
    img[:, 1::2] = (30, 30, 220)
    full = dct.simulate(img, 90, "4:4:4")
    sub = dct.simulate(img, 90, "4:2:0")
    assert abs(full.ssim - sub.ssim) < 0.001
    assert sub.ssim_cb < full.ssim_cb - 0.2 and sub.ssim_cr < full.ssim_cr - 0.2


def test_sweep_equals_single_simulations():
    img = data.chelsea()[:120, :150]
    settings = [dct.Setting(q, k, s) for q in (40, 80) for k in (64, 20) for s in ("4:4:4", "4:2:0")]
    points = dct.sweep(img, settings)
    for setting, point in zip(settings, points):
        single = dct.simulate(img, setting.quality, setting.subsampling, setting.cutoff)
        assert point.setting == setting
        assert point.estimated_bytes == single.estimated_bytes
        assert point.ssim == pytest.approx(single.ssim, abs=1e-9)
        assert point.ssim_cb == pytest.approx(single.ssim_cb, abs=1e-9)


def test_size_and_ssim_move_with_quality():
    img = data.astronaut()[:256, :256]
    points = dct.sweep(img, [dct.Setting(q) for q in (20, 50, 80, 95)])
    sizes = [p.estimated_bytes for p in points]
    assert sizes == sorted(sizes) and len(set(sizes)) == 4
    assert points[0].ssim < points[-1].ssim


def test_explicit_tables():
    img = data.coffee()[:64, :64]
    luma, chroma = dct.quant_tables(60)
    a = dct.simulate(img, None, "4:2:0", tables=(luma, chroma))
    b = dct.simulate(img, 60, "4:2:0")
    assert a.estimated_bytes == b.estimated_bytes and a.ssim == b.ssim
    assert a.setting is None


@pytest.mark.parametrize("h, w", [(11, 11), (17, 23), (37, 53), (64, 64), (100, 7 * 17)])
def test_odd_sizes_work_and_keep_shape(h, w):
    rng = np.random.default_rng(h * w)
    img = rng.integers(0, 256, (h, w, 3), dtype=np.uint8)
    sim = dct.simulate(img, 75, "4:2:0")
    assert sim.reconstructed.shape == (h, w, 3) and sim.ssim_map.shape == (h, w)
    data_ = pillow_encode(img, *sim.tables, "4:2:0")
    assert sim.estimated_bytes == len(data_)
    assert (np.asarray(Image.open(io.BytesIO(data_))) == sim.reconstructed).all()


@pytest.mark.parametrize(
    "rgb, kwargs, message",
    [
        (np.zeros((32, 32, 3), np.float32), {}, "rgb must have dtype uint8"),
        (np.zeros((32, 32, 4), np.uint8), {}, r"rgb must have shape \(H, W, 3\) or \(H, W\)"),
        (np.zeros((0, 32, 3), np.uint8), {}, "rgb is empty"),
        (np.zeros((1, 1, 3), np.uint8), {}, "rgb must be at least 11x11 pixels"),
        ([[1, 2], [3, 4]], {}, "rgb must be a numpy array of uint8, got list"),
        (np.zeros((32, 32, 3), np.uint8), {"quality": 0}, "quality must be an integer in 1..100, got 0"),
        (np.zeros((32, 32, 3), np.uint8), {"cutoff": 99}, "cutoff must be an integer zigzag position in 1..64, got 99"),
        (np.zeros((32, 32, 3), np.uint8), {"subsampling": "4:1:1"}, "subsampling must be one of"),
    ],
)
def test_bad_input(rgb, kwargs, message):
    args = dict(quality=75, subsampling="4:2:0", cutoff=64)
    args.update(kwargs)
    with pytest.raises(ValueError, match=message):
        dct.simulate(rgb, args["quality"], args["subsampling"], args["cutoff"])


@pytest.mark.parametrize("sub", ["4:4:4", "4:2:2", "4:2:0"])
def test_partial_mcus_give_libjpegs_file_and_pixels(sub):
    """An odd-sized crop (partial MCUs at the right and bottom, so dummy blocks in the scan) must
    give Pillow/libjpeg's file size byte for byte and its decoded pixels sample for sample."""
    img = np.ascontiguousarray(data.coffee()[5:228, 3:301])  # 298 x 223: partial MCUs both ways
    setting = dct.Setting(70, 64, sub)
    sim = dct.PreparedImage(img).evaluate(setting, want_arrays=True)
    luma, chroma = setting.tables()
    data_bytes = pillow_encode(img, luma, chroma, sub)
    assert sim.estimated_bytes == len(data_bytes)
    assert sim.standard_bytes == len(pillow_encode(img, luma, chroma, sub, optimize=False))
    np.testing.assert_array_equal(sim.reconstructed, np.asarray(Image.open(io.BytesIO(data_bytes)).convert("RGB")))


def test_quantizer_lanes_equal_the_reciprocal_formula_in_python_integers():
    """The compiled quantizer (32-bit lanes) against libjpeg-turbo's reciprocal rule written with
    Python's unbounded integers, ((|t| + c) * fq) >> r with t's sign, for every coefficient an 8-bit
    sample block can give (|t| <= 8192 on the x8 scale) and tables from quality 1 to 100."""
    from dct.simulate import quantize, reciprocal_divisors

    values = np.arange(-8192, 8193)
    for quality in (1, 10, 35, 50, 75, 90, 100):
        for table in dct.Setting(quality, 64, "4:2:0").tables():
            fq, c, r = reciprocal_divisors(table.reshape(64))
            got = quantize(np.repeat(values[:, None], 64, axis=1).astype(np.int16), table.reshape(64))
            for k in (0, 1, 9, 35, 63):
                magnitude = [((abs(int(t)) + int(c[k])) * int(fq[k])) >> int(r[k]) for t in values]
                want = np.sign(values) * np.array(magnitude)
                np.testing.assert_array_equal(got[:, k], want)


def test_recent_cache_keeps_its_count_and_byte_bounds():
    """The per-table cache evicts the least recently used entries past its count or its bytes, and
    keeps nothing larger than its byte bound."""
    from dct.simulate import _Recent

    cache = _Recent(3, max_bytes=1000)
    made = []

    def make(n):
        def build():
            made.append(n)
            return np.zeros(n, np.uint8)
        return build

    for key, n in [("a", 300), ("b", 300), ("c", 300)]:
        cache.get(key, make(n))
    cache.get("a", make(300))  # a hit: "a" becomes the most recent
    cache.get("d", make(300))  # 1200 bytes: the least recent ("b") goes
    assert list(cache._items) == ["c", "a", "d"] and cache._bytes == 900
    cache.get("e", make(50))  # four entries: "c" goes
    assert list(cache._items) == ["a", "d", "e"] and cache._bytes == 650
    cache.get("big", make(2000))  # larger than the bound: returned, never kept
    assert "big" not in cache._items and cache._bytes == 650
    assert made == [300, 300, 300, 300, 50, 2000]
