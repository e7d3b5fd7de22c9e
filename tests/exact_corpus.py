"""Images for checking the engine against libjpeg: open images that packages ship, plus generated UI.

Sources (all bundled with the packages, no download):
* scikit-image ``skimage.data``: astronaut, coffee, camera (grayscale), logo (RGBA), and the JPEG files
  rocket.jpg and hubble_deep_field.jpg;
* scikit-learn ``sklearn.datasets.load_sample_image("china.jpg")`` (a JPEG);
* matplotlib ``cbook.get_sample_data("grace_hopper.jpg")`` (a JPEG).

JPEG sources are cropped on the 8x8 grid of their old encoding, so that their coefficients sit near
that old quantization grid, as a re-encoded site image's do. The UI cards are drawn here with Pillow's
built-in font: a dark-mode card (light text on pure black, a saturated blue block), a light card (dark
text on white under a coloured band), white text on saturated colours, and a product shot on pure
white.
"""

from __future__ import annotations

import io
from functools import lru_cache

import numpy as np
from PIL import Image, ImageDraw, ImageFont
from skimage import data


def _font(size: int):
    return ImageFont.load_default(size=size)


def dark_ui_card(width: int = 240, height: int = 160) -> np.ndarray:
    im = Image.new("RGB", (width, height), (0, 0, 0))
    d = ImageDraw.Draw(im)
    d.rectangle([12, 12, width - 12, 52], fill=(20, 60, 235))
    d.text((20, 20), "Fernridge trail pack", font=_font(18), fill=(255, 255, 255))
    d.text((16, 70), "Free returns within 30 days", font=_font(14), fill=(225, 225, 230))
    d.text((16, 96), "Ships in 2 days · 38 L", font=_font(12), fill=(160, 170, 180))
    d.rectangle([16, 124, 110, 148], outline=(90, 200, 255), width=2)
    d.text((26, 128), "Add to cart", font=_font(13), fill=(90, 200, 255))
    return np.asarray(im)


def light_ui_card(width: int = 240, height: int = 160) -> np.ndarray:
    im = Image.new("RGB", (width, height), (255, 255, 255))
    d = ImageDraw.Draw(im)
    d.rectangle([0, 0, width, 40], fill=(236, 120, 32))
    d.text((12, 10), "Winter sale", font=_font(20), fill=(255, 255, 255))
    d.text((12, 56), "Insulated boots from 89 EUR", font=_font(15), fill=(30, 30, 30))
    d.text((12, 84), "Order by Friday for delivery", font=_font(12), fill=(90, 90, 90))
    d.line([12, 110, width - 12, 110], fill=(200, 200, 200), width=1)
    d.text((12, 122), "Fernridge Outfitters", font=_font(13), fill=(20, 110, 60))
    return np.asarray(im)


def white_on_saturated(width: int = 240, height: int = 120) -> np.ndarray:
    im = Image.new("RGB", (width, height), (255, 255, 255))
    d = ImageDraw.Draw(im)
    colours = [(230, 0, 30), (0, 60, 255), (0, 170, 40), (255, 0, 200)]
    w = width // len(colours)
    for i, c in enumerate(colours):
        d.rectangle([i * w, 0, (i + 1) * w, height], fill=c)
        d.text((i * w + 6, 20), "SALE", font=_font(20), fill=(255, 255, 255))
        d.text((i * w + 6, 60), "-30%", font=_font(16), fill=(255, 255, 255))
    return np.asarray(im)


def product_on_white(width: int = 200, height: int = 200) -> np.ndarray:
    yy, xx = np.mgrid[0:height, 0:width].astype(np.float64)
    img = np.full((height, width, 3), 255.0)
    inside = ((xx - width / 2) / (width * 0.32)) ** 2 + ((yy - height * 0.55) / (height * 0.25)) ** 2 <= 1
    shade = 0.55 + 0.45 * (xx / width)
    img[inside] = np.stack([150 * shade, 90 * shade, 50 * shade], -1)[inside]
    img[int(height * 0.3) : int(height * 0.36), int(width * 0.3) : int(width * 0.7)] = (40, 40, 40)
    return np.clip(img, 0, 255).astype(np.uint8)


def _grid_crop(img: np.ndarray, top: int, left: int, size: int) -> np.ndarray:
    """A crop on the old 8x8 grid of a JPEG source (top, left multiples of 8 — or of 16 for 4:2:0)."""
    return np.ascontiguousarray(img[top : top + size, left : left + size])


def _alpha_logo() -> np.ndarray:
    """scikit-image's RGBA logo, composited over white by Eightfold's own decoder (dct.io)."""
    from dct.io import decode_image

    buf = io.BytesIO()
    Image.fromarray(data.logo()).save(buf, "PNG")
    return decode_image(buf.getvalue(), background=(255, 255, 255)).pixels[::2, ::2].copy()


def _grace_hopper() -> np.ndarray:
    import matplotlib.cbook as cbook

    with Image.open(cbook.get_sample_data("grace_hopper.jpg")) as im:
        return np.asarray(im.convert("RGB"))


def _china() -> np.ndarray:
    from sklearn.datasets import load_sample_image

    return load_sample_image("china.jpg")


@lru_cache(maxsize=None)
def corpus() -> dict[str, np.ndarray]:
    """Name -> uint8 image ((H, W, 3), or (H, W) for grayscale); sides 77..256 to keep tests quick."""
    return {
        "astronaut (black areas)": np.ascontiguousarray(data.astronaut()[::2, ::2]),
        "coffee 233x201 (odd)": np.ascontiguousarray(data.coffee()[100:301, 150:383]),
        "camera (grayscale)": np.ascontiguousarray(data.camera()[::2, ::2]),
        "astronaut crop 77x101 (odd)": np.ascontiguousarray(data.astronaut()[37:138, 11:88]),
        "rocket.jpg (JPEG source)": _grid_crop(data.rocket(), 96, 192, 192),
        "hubble_deep_field.jpg (JPEG source, dark)": _grid_crop(data.hubble_deep_field(), 160, 160, 192),
        "grace_hopper.jpg (matplotlib, JPEG source)": _grid_crop(_grace_hopper(), 64, 192, 208),
        "china.jpg (scikit-learn, JPEG source)": _grid_crop(_china(), 96, 224, 192),
        "logo with alpha over white": _alpha_logo(),
        "dark-mode UI card": dark_ui_card(),
        "light UI card": light_ui_card(),
        "white text on saturated colours": white_on_saturated(),
        "product on pure white": product_on_white(),
    }


# Three images swept over every quality 1..100 (small crops of the corpus, to keep the run short).
FULL_SWEEP = {
    "dark-mode UI card": lambda: dark_ui_card(120, 88),
    "astronaut (black areas)": lambda: np.ascontiguousarray(data.astronaut()[::4, ::4][:104, :120]),
    "grace_hopper.jpg (matplotlib, JPEG source)": lambda: _grid_crop(_grace_hopper(), 64, 192, 112),
}
