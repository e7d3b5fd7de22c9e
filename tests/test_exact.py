"""The engine against libjpeg itself: the same quantized coefficients, bytes and decoded pixels.

References, none written here:
* **Pillow** (its bundled libjpeg-turbo, default accurate integer DCT) writes every file with the
  engine's tables and subsampling, ``optimize=True`` (and ``optimize=False`` for the standard
  Huffman tables), and decodes it;
* **jpeglib** (PyPI) reads back the quantized DCT coefficients the file holds;
* **scikit-image**'s ``structural_similarity`` (Wang et al. 2004 settings: Gaussian sigma 1.5,
  population covariance, data range 255) on the luma that Pillow's ``convert("L")`` computes from its
  decoded RGB, and on the chroma planes libjpeg decodes (``draft("YCbCr")``);
* the images are bundled with scikit-image, scikit-learn and matplotlib, or drawn in
  tests/exact_corpus.py.

Targets (the engine issue): coefficients identical on every block, size error <= 0.1 % (we get 0),
luma SSIM within 1e-4 of the real decode's and Cb/Cr within 1e-3. The figures are printed at the end
of the run.
"""

from __future__ import annotations

import io
from collections import defaultdict

import jpeglib
import numpy as np
import pytest
from PIL import Image
from skimage.metrics import structural_similarity

import dct
from dct.simulate import quantize
from dct.tables import UNZIGZAG
from dct.tables import SUBSAMPLINGS
from tests.exact_corpus import FULL_SWEEP, corpus

PILLOW_SUBSAMPLING = {"4:4:4": 0, "4:2:2": 1, "4:2:0": 2}
FIGURES: dict[str, list[float]] = defaultdict(list)


def skimage_ssim(a: np.ndarray, b: np.ndarray) -> float:
    return float(structural_similarity(a, b, gaussian_weights=True, sigma=1.5, use_sample_covariance=False,
                                       data_range=255))


def pillow_file(img, tables, subsampling, *, optimize=True) -> bytes:
    buf = io.BytesIO()
    luma, chroma = tables
    qtables = [luma.ravel().tolist()] if img.ndim == 2 else [luma.ravel().tolist(), chroma.ravel().tolist()]
    Image.fromarray(img).save(buf, "JPEG", qtables=qtables, subsampling=PILLOW_SUBSAMPLING[subsampling],
                              optimize=optimize)
    return buf.getvalue()


def check_against_libjpeg(name, img, setting, tmp_path, *, with_ssim=True):
    """Compare one setting on one image with the file Pillow writes; record the figures."""
    prepared = dct.PreparedImage(img)
    sim = prepared.evaluate(setting, want_arrays=True)
    data = pillow_file(img, sim.tables, setting.subsampling)
    label = f"{name} {setting.label()}"

    # Size, byte for byte (optimal and standard Huffman tables).
    assert sim.estimated_bytes == len(data), f"{label}: {sim.estimated_bytes} vs {len(data)} bytes"
    standard = len(pillow_file(img, sim.tables, setting.subsampling, optimize=False))
    assert sim.standard_bytes == standard, f"{label} (standard tables): {sim.standard_bytes} vs {standard}"
    FIGURES["size error"].append(abs(sim.estimated_bytes - len(data)) / len(data))

    # Coefficients, block for block, as jpeglib reads them from the file.
    path = tmp_path / "file.jpg"
    path.write_bytes(data)
    file_dct = jpeglib.read_dct(str(path))
    ours = prepared.dct_coefficients(setting.subsampling)
    planes = [file_dct.Y] if img.ndim == 2 else [file_dct.Y, file_dct.Cb, file_dct.Cr]
    table_of = [0, 1, 1]
    for c, (coefs, theirs) in enumerate(zip(ours, planes)):
        q = quantize(coefs[..., UNZIGZAG], sim.tables[table_of[c]])
        q = q.reshape(theirs.shape)
        mismatched = int(np.count_nonzero(np.any(q != theirs, axis=(2, 3))))
        FIGURES["blocks differing"].append(mismatched)
        assert mismatched == 0, f"{label}: component {c}: {mismatched} blocks differ from the file"
    FIGURES["blocks compared"].append(sum(p.shape[0] * p.shape[1] for p in planes))

    # Decoded pixels, pixel for pixel.
    with Image.open(io.BytesIO(data)) as im:
        decoded = np.asarray(im)
        luma_seen = np.asarray(im.convert("L"))
    differing = int(np.count_nonzero(sim.reconstructed != decoded))
    FIGURES["pixels differing"].append(differing)
    assert differing == 0, f"{label}: {differing} samples differ from Pillow's decode"
    if not with_ssim:
        return

    # SSIM, against scikit-image on the real decode.
    original_luma = img if img.ndim == 2 else np.asarray(Image.fromarray(img).convert("L"))
    d_luma = abs(sim.ssim - skimage_ssim(original_luma, luma_seen))
    FIGURES["luma SSIM error"].append(d_luma)
    assert d_luma <= 1e-4, f"{label}: luma SSIM {sim.ssim:.6f} is {d_luma:.2e} off"
    if img.ndim == 3:
        with Image.open(io.BytesIO(data)) as im:
            im.draft("YCbCr", im.size)
            ycc = np.asarray(im)
        original_ycc = dct.color.rgb_to_ycbcr(img)  # libjpeg's encoder conversion (coefficients above)
        for k, value in ((1, sim.ssim_cb), (2, sim.ssim_cr)):
            d_chroma = abs(value - skimage_ssim(original_ycc[k], ycc[..., k]))
            FIGURES["chroma SSIM error"].append(d_chroma)
            assert d_chroma <= 1e-3, f"{label}: chroma {k} SSIM {value:.6f} is {d_chroma:.2e} off"


CORPUS_SETTINGS = [
    dct.Setting(q, cutoff, sub) for q in (5, 20, 40, 55, 70, 85, 95, 100) for cutoff in (64, 28, 10)
    for sub in SUBSAMPLINGS
]


@pytest.mark.parametrize("name", list(corpus()))
def test_corpus_matches_libjpeg(name, tmp_path):
    img = corpus()[name]
    settings = CORPUS_SETTINGS if img.ndim == 3 else [s for s in CORPUS_SETTINGS if s.subsampling == "4:2:0"]
    for setting in settings:
        check_against_libjpeg(name, img, setting, tmp_path)


@pytest.mark.slow
@pytest.mark.parametrize("name", list(FULL_SWEEP))
def test_every_quality_matches_libjpeg(name, tmp_path):
    """Every quality 1..100 in every subsampling mode (some qualities behave differently, e.g. 40, 70)."""
    img = FULL_SWEEP[name]()
    for q in range(1, 101):
        for sub in SUBSAMPLINGS:
            check_against_libjpeg(name, img, dct.Setting(q, 64, sub), tmp_path, with_ssim=q % 3 == 1)


def test_print_figures(capsys):
    """Print what the checks above measured (run after them; pytest keeps file order)."""
    if not FIGURES["size error"]:
        pytest.skip("run with the exactness tests above to get figures")
    cases = len(FIGURES["size error"])
    with capsys.disabled():
        print(
            f"\n[engine vs libjpeg, {cases} encodes] size error max {max(FIGURES['size error']):.3%}; "
            f"blocks differing {sum(FIGURES['blocks differing'])} of {sum(FIGURES['blocks compared'])}; "
            f"decoded samples differing {sum(FIGURES['pixels differing'])}; "
            f"luma SSIM error max {max(FIGURES['luma SSIM error']):.1e} "
            f"({len(FIGURES['luma SSIM error'])} cases); "
            f"chroma SSIM error max {max(FIGURES['chroma SSIM error']):.1e}"
        )
