#!/usr/bin/env python3
"""Build the source crops of the labelled visible-damage set (``tests/damage_set/*.png``).

Most crops are 96x96 pixels (six 16x16 MCUs); two are 256x128 pages that are mostly empty. They come from the sample images bundled with
scikit-image (``skimage.data``: photographs released for such use, see its README) and from
drawings made here with Pillow's built-in font (``ImageFont.load_default``), in the fictional
Fernridge Outfitters shop's colours. The script is deterministic (fixed seeds).

The labels are not made here: ``tests/damage_set/labels.csv`` records, for each crop and JPEG
setting, whether a person looking at original and candidate side by side at 2:1 saw damage, and
why. ``--montage DIR`` writes those side-by-side views (original | real JPEG, at 2:1) as PNGs, for
labelling new rows.

Usage::

    python scripts/make_damage_set.py [--out tests/damage_set] [--montage /tmp/damage-views]
"""

from __future__ import annotations

import argparse
import csv
import sys
from pathlib import Path

import numpy as np
from PIL import Image, ImageDraw, ImageFont
from scipy import ndimage

ROOT = Path(__file__).resolve().parents[1]
DEFAULT_OUT = ROOT / "tests" / "damage_set"
SIZE = 96
GREEN = (38, 86, 64)
ORANGE = (214, 112, 44)
CREAM = (250, 244, 232)


def _font(size: int):
    return ImageFont.load_default(size=size)


def _canvas(colour) -> tuple[Image.Image, ImageDraw.ImageDraw]:
    im = Image.new("RGB", (SIZE, SIZE), colour)
    return im, ImageDraw.Draw(im)


def _skimage(name: str, top: int, left: int) -> np.ndarray:
    from skimage import data

    a = getattr(data, name)()
    if a.ndim == 2:
        a = np.stack([a] * 3, axis=-1)
    return np.ascontiguousarray(a[top : top + SIZE, left : left + SIZE, :3])


def text_black_on_white():
    im, d = _canvas((255, 255, 255))
    d.text((6, 8), "Fern", fill=(20, 20, 20), font=_font(30))
    d.text((6, 50), "Trail boots", fill=(20, 20, 20), font=_font(14))
    d.text((6, 70), "EUR 129.00", fill=(60, 60, 60), font=_font(12))
    return np.asarray(im)


def text_white_on_green():
    im, d = _canvas(GREEN)
    d.text((8, 10), "Sale", fill=(255, 255, 255), font=_font(34))
    d.text((8, 60), "up to 40 % off", fill=(255, 255, 255), font=_font(13))
    return np.asarray(im)


def text_orange_on_cream():
    im, d = _canvas(CREAM)
    d.text((6, 12), "Camp", fill=ORANGE, font=_font(28))
    d.text((6, 52), "Free delivery", fill=ORANGE, font=_font(13))
    d.text((6, 72), "over 50", fill=(90, 80, 70), font=_font(13))
    return np.asarray(im)


def ui_card():
    """A large heading on a white page under a coloured band (the card a new user swept)."""
    im, d = _canvas((255, 255, 255))
    d.rectangle([0, 0, SIZE, 22], fill=ORANGE)
    d.text((6, 4), "Fernridge", fill=(255, 255, 255), font=_font(14))
    d.text((6, 34), "Tents", fill=(30, 30, 30), font=_font(32))
    d.line([6, 80, 90, 80], fill=(200, 200, 200), width=1)
    return np.asarray(im)


def text_on_photo_coffee():
    im = Image.fromarray(_skimage("coffee", 150, 300))
    d = ImageDraw.Draw(im)
    d.text((6, 30), "Brew", fill=(255, 255, 255), font=_font(30))
    return np.asarray(im)


def text_on_photo_rocket():
    im = Image.fromarray(_skimage("rocket", 20, 40))
    d = ImageDraw.Draw(im)
    d.text((6, 20), "Launch", fill=(20, 20, 30), font=_font(24))
    d.text((6, 60), "day sale", fill=(20, 20, 30), font=_font(16))
    return np.asarray(im)


def dark_ui_list():
    im, d = _canvas((30, 31, 34))
    for i, word in enumerate(["Orders", "Stock", "Returns"]):
        d.text((10, 8 + 28 * i), word, fill=(220, 220, 220), font=_font(16))
        d.line([10, 30 + 28 * i, 86, 30 + 28 * i], fill=(60, 62, 66), width=1)
    return np.asarray(im)


def dark_ui_button():
    im, d = _canvas((18, 18, 18))
    d.rounded_rectangle([8, 20, 88, 52], radius=8, fill=ORANGE)
    d.text((18, 26), "Buy now", fill=(255, 255, 255), font=_font(16))
    d.text((10, 66), "3 in stock", fill=(170, 170, 170), font=_font(12))
    return np.asarray(im)


def line_art_map():
    im, d = _canvas((246, 241, 228))
    d.line([(0, 70), (30, 50), (55, 62), (96, 20)], fill=(180, 60, 40), width=2)
    for r in (12, 22, 32):
        d.ellipse([20 - r, 30 - r, 20 + r, 30 + r], outline=(90, 120, 80), width=1)
    d.line([(60, 96), (70, 40), (96, 35)], fill=(40, 40, 40), width=1)
    return np.asarray(im)


def line_art_icons():
    im, d = _canvas((255, 255, 255))
    d.polygon([(10, 80), (30, 20), (50, 80)], outline=(20, 20, 20), width=2)
    d.rectangle([58, 30, 88, 80], outline=GREEN, width=2)
    d.line([58, 55, 88, 55], fill=GREEN, width=1)
    d.ellipse([14, 84, 22, 92], fill=(20, 20, 20))
    return np.asarray(im)


def scanned_page():
    return _skimage("page", 40, 100)


def camera_edges():
    return _skimage("camera", 60, 200)


def _grain(base: np.ndarray, sigma: float, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    noise = rng.normal(0.0, sigma, base.shape[:2])[..., None]
    return np.clip(base.astype(np.float64) + noise, 0, 255).round().astype(np.uint8)


def grain_on_gradient():
    y, x = np.mgrid[0:SIZE, 0:SIZE] / SIZE
    base = np.stack([120 + 60 * x, 110 + 40 * y, 90 + 30 * x * y], axis=-1)
    return _grain(base, 8.0, 1)


def grain_on_photo():
    return _grain(_skimage("astronaut", 300, 380), 7.0, 2)


def gravel_texture():
    return _skimage("gravel", 200, 200)


def skin_face():
    return _skimage("astronaut", 60, 180)


def skin_cheek():
    return _skimage("astronaut", 110, 200)


def foliage_grass():
    return _skimage("grass", 100, 100)


def fur_cat():
    return _skimage("chelsea", 120, 120)


def gradient_linear():
    x = np.linspace(0.0, 1.0, SIZE)[None, :, None]
    a, b = np.array(GREEN, float), np.array(ORANGE, float)
    base = np.broadcast_to(a + (b - a) * x, (SIZE, SIZE, 3))
    return np.clip(base, 0, 255).round().astype(np.uint8)


def gradient_radial():
    y, x = np.mgrid[0:SIZE, 0:SIZE]
    r = np.hypot(x - 40, y - 30) / SIZE
    v = 235 - 120 * r
    base = np.stack([v, v * 0.97, v * 0.92], axis=-1)
    return np.clip(ndimage.gaussian_filter(base, (1, 1, 0)), 0, 255).round().astype(np.uint8)


def _page(size, colour):
    im = Image.new("RGB", size, colour)
    return im, ImageDraw.Draw(im)


def page_heading():
    """A mostly empty page: the mean SSIM is dominated by white paper (the case the mean misses)."""
    im, d = _page((256, 128), (255, 255, 255))
    d.rectangle([0, 0, 256, 18], fill=GREEN)
    d.text((8, 2), "Fernridge Outfitters", fill=(255, 255, 255), font=_font(12))
    d.text((16, 40), "Winter tents", fill=(25, 25, 25), font=_font(26))
    d.text((16, 80), "Free returns for 60 days", fill=(80, 80, 80), font=_font(12))
    return np.asarray(im)


def page_dark():
    im, d = _page((256, 128), (24, 25, 28))
    d.text((12, 14), "Dashboard", fill=(235, 235, 235), font=_font(20))
    d.text((12, 56), "12 orders waiting", fill=(160, 160, 165), font=_font(12))
    d.rounded_rectangle([160, 90, 240, 114], radius=6, outline=(90, 160, 120), width=1)
    d.text((172, 95), "Ship all", fill=(90, 160, 120), font=_font(12))
    return np.asarray(im)


CROPS = {
    "text_black_on_white": ("text on flat colour", text_black_on_white),
    "text_white_on_green": ("text on flat colour", text_white_on_green),
    "text_orange_on_cream": ("text on flat colour", text_orange_on_cream),
    "ui_card": ("text on flat colour", ui_card),
    "text_on_photo_coffee": ("text on photo", text_on_photo_coffee),
    "text_on_photo_rocket": ("text on photo", text_on_photo_rocket),
    "dark_ui_list": ("dark-mode UI", dark_ui_list),
    "dark_ui_button": ("dark-mode UI", dark_ui_button),
    "line_art_map": ("line art", line_art_map),
    "line_art_icons": ("line art", line_art_icons),
    "scanned_page": ("text on photo", scanned_page),
    "camera_edges": ("photo with sharp edges", camera_edges),
    "grain_on_gradient": ("fine grain", grain_on_gradient),
    "grain_on_photo": ("fine grain", grain_on_photo),
    "gravel_texture": ("fine grain", gravel_texture),
    "skin_face": ("skin", skin_face),
    "skin_cheek": ("skin", skin_cheek),
    "foliage_grass": ("foliage", foliage_grass),
    "fur_cat": ("foliage", fur_cat),
    "gradient_linear": ("smooth gradient", gradient_linear),
    "gradient_radial": ("smooth gradient", gradient_radial),
    "page_heading": ("text on flat colour", page_heading),
    "page_dark": ("dark-mode UI", page_dark),
}


def write_crops(out: Path) -> None:
    out.mkdir(parents=True, exist_ok=True)
    for name, (_, make) in CROPS.items():
        pixels = make()
        assert pixels.ndim == 3 and pixels.shape[2] == 3 and pixels.dtype == np.uint8, name
        Image.fromarray(pixels).save(out / f"{name}.png", optimize=True)


def write_montages(out: Path, crops: Path, labels: Path) -> None:
    """Original | real JPEG at 2:1 (nearest neighbour), one PNG per labels row, 4 rows per sheet."""
    sys.path.insert(0, str(ROOT))
    from dct.io import encode_jpeg
    import io as _io

    out.mkdir(parents=True, exist_ok=True)
    rows = list(csv.DictReader(labels.open(encoding="utf-8")))
    tiles = []
    for row in rows:
        src = np.asarray(Image.open(crops / f"{row['crop']}.png").convert("RGB"))
        data = encode_jpeg(src, quality=int(row["quality"]), cutoff=int(row["cutoff"]), subsampling=row["subsampling"])
        jpg = np.asarray(Image.open(_io.BytesIO(data)).convert("RGB"))
        pair = np.concatenate([src, np.full((src.shape[0], 4, 3), 255, np.uint8), jpg], axis=1)
        tiles.append((row, np.kron(pair, np.ones((2, 2, 1), np.uint8))))
    for sheet in range(0, len(tiles), 4):
        group = tiles[sheet : sheet + 4]
        h = sum(t.shape[0] + 18 for _, t in group)
        canvas = Image.new("RGB", (max(t.shape[1] for _, t in group), h), (128, 128, 128))
        d = ImageDraw.Draw(canvas)
        y = 0
        for row, t in group:
            d.text((2, y + 2), f"#{row['id']} {row['crop']} q{row['quality']} k{row['cutoff']} {row['subsampling']}",
                   fill=(255, 255, 255), font=_font(12))
            canvas.paste(Image.fromarray(t), (0, y + 18))
            y += t.shape[0] + 18
        canvas.save(out / f"sheet{sheet // 4:02d}.png")


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--out", type=Path, default=DEFAULT_OUT)
    p.add_argument("--montage", type=Path, help="also write original | JPEG sheets at 2:1 here")
    args = p.parse_args(argv)
    write_crops(args.out)
    if args.montage:
        write_montages(args.montage, args.out, args.out / "labels.csv")
    return 0


if __name__ == "__main__":
    sys.exit(main())
