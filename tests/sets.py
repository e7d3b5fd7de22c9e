"""Small generated sample sets with known structure, shared by the sweep tests."""

import numpy as np
from PIL import Image
from skimage import data


def flat_graphic(seed: int, size=(112, 136)) -> np.ndarray:
    """Few colours, large areas, hard edges: compresses very well."""
    rng = np.random.default_rng(seed)
    h, w = size
    img = np.empty((h, w, 3), np.uint8)
    img[:] = rng.integers(180, 250, 3)
    for _ in range(4):
        y, x = rng.integers(0, h - 40), rng.integers(0, w - 40)
        img[y : y + rng.integers(20, 40), x : x + rng.integers(20, 60)] = rng.integers(0, 200, 3)
    return img


def noisy_photo(seed: int, size=(112, 136)) -> np.ndarray:
    """Crops of scikit-image's sample photos (open dataset) with added grain: compresses poorly."""
    photos = [data.astronaut(), data.coffee(), data.chelsea(), data.rocket()]
    src = photos[seed % len(photos)]
    rng = np.random.default_rng(seed)
    h, w = size
    y, x = rng.integers(0, src.shape[0] - h), rng.integers(0, src.shape[1] - w)
    crop = src[y : y + h, x : x + w].astype(float)
    grain = rng.normal(0, 5, (h, w, 1))  # luminance grain, as a camera's denoised output keeps
    return np.clip(crop + grain, 0, 255).astype(np.uint8)


def write_set(root, *, flat=3, photo=3, size=(112, 136)):
    (root / "flat").mkdir(parents=True, exist_ok=True)
    (root / "photo").mkdir(parents=True, exist_ok=True)
    for i in range(flat):
        Image.fromarray(flat_graphic(i, size)).save(root / "flat" / f"card{i}.png")
    for i in range(photo):
        Image.fromarray(noisy_photo(i, size)).save(root / "photo" / f"shot{i}.png")
    return root
