"""Decoding uploaded images to plain sRGB pixel arrays, and encoding with Pillow for reference.

This is the only module in ``dct`` that imports Pillow. Everything it returns is a bare numpy array
(or bytes it encoded itself), so no metadata (EXIF, GPS, comments, colour profiles) can travel further
into Eightfold or be served back.

Decoding rules, in order:

1. Read the file (or bytes); refuse empty, missing, unreadable and non-regular files.
2. ``Image.open`` reads the header only; refuse anything over ``max_pixels`` before decoding pixels.
3. Take the first frame of animated / multi-page files (with a warning) and decode it fully, so a
   truncated file fails here and not later in a worker.
4. Apply the EXIF orientation.
5. Bring the pixel mode to 8-bit grayscale or RGB (16-bit, 32-bit integer and float samples are
   scaled to 8 bits; palette, CMYK, YCbCr, HSV and CIELAB become RGB), keeping any alpha aside.
6. Convert an embedded ICC profile to sRGB with LittleCMS (``PIL.ImageCms``), unless it already
   describes sRGB.
7. Composite transparent pixels over the background colour (Porter-Duff "over", straight alpha).
"""

from __future__ import annotations

import functools
import io
import os
import re
import stat
import warnings
from dataclasses import dataclass, field

import numpy as np
from PIL import Image, ImageFile, ImageOps, UnidentifiedImageError

from .tables import check_subsampling, check_table, quant_tables

try:  # LittleCMS ships in Pillow's wheels, but a source build may lack it.
    from PIL import ImageCms
except ImportError:  # pragma: no cover - depends on the Pillow build
    ImageCms = None

__all__ = [
    "MAX_PIXELS",
    "DecodedImage",
    "ImageRejected",
    "decode_image",
    "encode_jpeg",
    "encode_jpeg_tables",
    "encode_png",
    "resize_to_width",
]

MAX_PIXELS = 50_000_000

# Pillow's subsampling codes for JPEG save.
_PILLOW_SUBSAMPLING = {"4:4:4": 0, "4:2:2": 1, "4:2:0": 2}

# Leading bytes of formats we can name when Pillow cannot parse a damaged header.
_SIGNATURES = (
    (b"\xff\xd8\xff", "JPEG"),
    (b"\x89PNG\r\n\x1a\n", "PNG"),
    (b"GIF87a", "GIF"),
    (b"GIF89a", "GIF"),
    (b"II*\x00", "TIFF"),
    (b"MM\x00*", "TIFF"),
)

_BOMB_MESSAGE = re.compile(r"\((\d+) pixels\)")


class ImageRejected(ValueError):
    """A file that cannot be used; str(exc) is the human reason shown to users (no traceback)."""


@dataclass
class DecodedImage:
    """A decoded image: bare pixels plus what the user should be told about the decoding.

    Attributes
    ----------
    pixels : ndarray, shape (H, W, 3) or (H, W), uint8
        sRGB pixels; grayscale sources stay 2-D.
    warnings : list of str
        Short human notes, e.g. ``"alpha composited over #ffffff"``.
    source_format : str
        Pillow's format name ("JPEG", "PNG", "GIF", "WEBP", "TIFF", ...); multi-picture JPEG
        files from cameras (Pillow's "MPO") are reported as "JPEG".
    original_size : tuple of int
        ``(width, height)`` after EXIF orientation.
    """

    pixels: np.ndarray
    warnings: list[str] = field(default_factory=list)
    source_format: str = ""
    original_size: tuple[int, int] = (0, 0)


def decode_image(
    source: str | os.PathLike | bytes,
    *,
    background: tuple[int, int, int] = (255, 255, 255),
    max_pixels: int = MAX_PIXELS,
) -> DecodedImage:
    """Decode an image file to sRGB pixels, or raise ``ImageRejected`` with a short reason.

    Parameters
    ----------
    source : str, os.PathLike or bytes
        A path to a regular file, or the file's bytes (``bytearray``/``memoryview`` accepted).
    background : tuple of 3 int, keyword-only
        sRGB colour (0..255 each) under transparent pixels.
    max_pixels : int, keyword-only
        Refuse images with more than this many pixels (width * height), before decoding them.
        Pillow also refuses anything over twice ``PIL.Image.MAX_IMAGE_PIXELS`` on its own.

    Returns
    -------
    DecodedImage
        ``pixels`` is (H, W, 3) uint8, or (H, W) uint8 for grayscale sources; C-contiguous and writable.

    Raises
    ------
    ImageRejected
        The file cannot be used; ``str(exc)`` is the reason for the user.
    ValueError
        ``background`` or ``max_pixels`` is invalid (a caller's mistake, not the file's).
    """
    background = _check_background(background)
    if isinstance(max_pixels, bool) or not isinstance(max_pixels, (int, np.integer)) or max_pixels < 1:
        raise ValueError(f"max_pixels must be a positive integer, got {max_pixels!r}")
    # Never decode what a truncated file leaves out; a partial image would skew every estimate.
    if ImageFile.LOAD_TRUNCATED_IMAGES:
        raise ValueError("PIL.ImageFile.LOAD_TRUNCATED_IMAGES is set; Eightfold needs it False")

    notes: list[str] = []
    with _open_source(source) as fp:
        im, fmt, icc = _open_first_frame(fp, max_pixels, notes)
    try:
        return _finish(im, fmt, icc, background, notes)
    finally:
        im.close()


def resize_to_width(pixels: np.ndarray, width: int | None) -> np.ndarray:
    """Downscale to a delivery width with Lanczos-3, keeping the aspect ratio; never upscale.

    Parameters
    ----------
    pixels : ndarray, shape (H, W, 3) or (H, W), uint8
    width : int or None
        Target width in pixels. ``None``, or a width at or above the image's own, returns
        ``pixels`` itself unchanged.

    Returns
    -------
    ndarray, shape (round(H * width / W), width[, 3]), uint8
        The height is at least 1.
    """
    pixels = _check_pixels(pixels)
    if width is None:
        return pixels
    if isinstance(width, bool) or not isinstance(width, (int, np.integer)) or width < 1:
        raise ValueError(f"width must be a positive integer or None, got {width!r}")
    h, w = pixels.shape[:2]
    if width >= w:
        return pixels
    height = max(1, int(round(h * width / w)))
    img = Image.fromarray(np.ascontiguousarray(pixels))
    out = img.resize((int(width), height), Image.Resampling.LANCZOS)
    return np.array(out, dtype=np.uint8)


def encode_jpeg(
    pixels: np.ndarray,
    *,
    quality: int,
    cutoff: int = 64,
    subsampling: str = "4:2:0",
    optimize: bool = True,
) -> bytes:
    """Encode with Pillow/libjpeg using exactly the engine's quantization tables.

    Parameters
    ----------
    pixels : ndarray, shape (H, W, 3) or (H, W), uint8
        RGB pixels (coded as YCbCr with two tables) or grayscale (one component, luma table only).
    quality, cutoff : int, keyword-only
        As in ``dct.tables.quant_tables``.
    subsampling : {"4:4:4", "4:2:2", "4:2:0"}, keyword-only
        Chroma subsampling; ignored for grayscale.
    optimize : bool, keyword-only
        Optimized Huffman tables (a second pass in libjpeg), as the engine's size estimate assumes.

    Returns
    -------
    bytes
        A baseline JFIF file with no EXIF and no ICC profile.
    """
    luma, chroma = quant_tables(quality, cutoff)
    return encode_jpeg_tables(pixels, luma=luma, chroma=chroma, subsampling=subsampling, optimize=optimize)


def encode_jpeg_tables(
    pixels: np.ndarray,
    *,
    luma,
    chroma,
    subsampling: str = "4:2:0",
    optimize: bool = True,
) -> bytes:
    """Encode with Pillow/libjpeg using explicit quantization tables (a budget's exact tables).

    Parameters
    ----------
    pixels : ndarray, shape (H, W, 3) or (H, W), uint8
    luma, chroma : array-like, shape (8, 8) or (64,), integers 1..255, keyword-only
        Natural (row-major) order, as ``dct.tables.quant_tables`` returns them. A grayscale image
        uses the luma table alone.
    subsampling, optimize : keyword-only
        As in :func:`encode_jpeg`.

    Notes
    -----
    ``quality`` is never passed beside ``qtables``: Pillow would then scale the given tables by it.
    """
    pixels = _check_pixels(pixels)
    check_subsampling(subsampling)
    luma = check_table(luma, "luma table")
    chroma = check_table(chroma, "chroma table")
    img = Image.fromarray(np.ascontiguousarray(pixels))
    buf = io.BytesIO()
    if pixels.ndim == 2:
        img.save(buf, "JPEG", qtables=[luma.ravel().tolist()], optimize=bool(optimize))
    else:
        img.save(
            buf,
            "JPEG",
            qtables=[luma.ravel().tolist(), chroma.ravel().tolist()],
            subsampling=_PILLOW_SUBSAMPLING[subsampling],
            optimize=bool(optimize),
        )
    return buf.getvalue()


def encode_png(pixels: np.ndarray) -> bytes:
    """Encode pixels as PNG with no metadata chunks at all (only IHDR, IDAT, IEND).

    Parameters
    ----------
    pixels : ndarray, shape (H, W, 3) or (H, W), uint8
    """
    pixels = _check_pixels(pixels)
    buf = io.BytesIO()
    Image.fromarray(np.ascontiguousarray(pixels)).save(buf, "PNG")
    return buf.getvalue()


# --------------------------------------------------------------------------------------------------
# Reading and opening


class _open_source:
    """Context manager giving a binary file object for a path or bytes, with clear rejections."""

    def __init__(self, source):
        self.source = source
        self.fp = None

    def __enter__(self):
        src = self.source
        if isinstance(src, (bytes, bytearray, memoryview)):
            data = bytes(src)
            if not data:
                raise ImageRejected("empty file (0 bytes)")
            self.fp = io.BytesIO(data)
            return self.fp
        if not isinstance(src, (str, os.PathLike)):
            raise ValueError(f"source must be a path or bytes, got {type(src).__name__!r}")
        path = os.fspath(src)
        try:
            st = os.stat(path)
            if stat.S_ISDIR(st.st_mode):
                raise ImageRejected("unreadable file: it is a folder")
            # Opening a FIFO or device would block or stream forever.
            if not stat.S_ISREG(st.st_mode):
                raise ImageRejected("unreadable file: not a regular file")
            self.fp = open(path, "rb")
        except ImageRejected:
            raise
        except OSError as exc:
            raise ImageRejected(f"unreadable file: {_os_reason(exc)}") from None
        except ValueError:  # e.g. an embedded NUL in the path
            raise ImageRejected("unreadable file: invalid path") from None
        if os.fstat(self.fp.fileno()).st_size == 0:
            self.fp.close()
            raise ImageRejected("empty file (0 bytes)")
        return self.fp

    def __exit__(self, *exc):
        if self.fp is not None:
            self.fp.close()
        return False


def _os_reason(exc: OSError) -> str:
    if isinstance(exc, FileNotFoundError):
        return "no such file"
    if isinstance(exc, PermissionError):
        return "permission denied"
    if isinstance(exc, IsADirectoryError):
        return "it is a folder"
    return (exc.strerror or type(exc).__name__).lower()


def _sniff(fp) -> str | None:
    fp.seek(0)
    head = fp.read(16)
    for magic, name in _SIGNATURES:
        if head.startswith(magic):
            return name
    if head[:4] == b"RIFF" and head[8:12] == b"WEBP":
        return "WEBP"
    return None


def _open_first_frame(fp, max_pixels: int, notes: list[str]):
    """Open, size-check and fully decode the first frame. Returns (image, format, icc bytes)."""
    # Record Pillow's warnings instead of letting the caller's filters turn them into errors; the
    # size guard below is ours. (catch_warnings swaps process-wide state: not thread-safe on 3.11.)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            im = Image.open(fp)
        except UnidentifiedImageError:
            fmt = _sniff(fp)
            if fmt:
                raise ImageRejected(f"truncated or corrupt {fmt} data") from None
            raise ImageRejected("not an image file (unrecognised format)") from None
        except Image.DecompressionBombError as exc:
            raise ImageRejected(_too_large(_header_size(fp), str(exc), max_pixels)) from None
        except MemoryError:
            raise ImageRejected("image too large to decode in memory") from None
        except Exception:  # Pillow plugins raise all sorts (SyntaxError, struct.error, ...)
            raise ImageRejected(f"truncated or corrupt {_sniff(fp) or 'image'} data") from None

        fmt = "JPEG" if im.format == "MPO" else (im.format or "image")
        try:
            w, h = im.size
            if w * h > max_pixels:
                raise ImageRejected(_too_large((w, h), "", max_pixels))
            if w < 1 or h < 1:
                raise ImageRejected(f"image has no pixels ({w} x {h})")
            n_frames = _frame_count(im, notes)
            if n_frames > 1:
                if im.format == "MPO":  # cameras append previews or depth maps
                    notes.append(f"multi-picture JPEG: first of {n_frames} images used")
                elif im.format in ("GIF", "PNG", "WEBP"):
                    notes.append(f"animated: first of {n_frames} frames used")
                else:
                    notes.append(f"{fmt} holds {n_frames} images: first used")
            icc = im.info.get("icc_profile") or None
            im.load()
        except ImageRejected:
            im.close()
            raise
        except MemoryError:
            im.close()
            raise ImageRejected("image too large to decode in memory") from None
        except Exception:  # OSError "image file is truncated", SyntaxError, zlib errors, ...
            im.close()
            raise ImageRejected(f"truncated or corrupt {fmt} data") from None

        try:
            oriented = ImageOps.exif_transpose(im)
        except Exception:  # a broken EXIF block must not cost the image
            notes.append("EXIF orientation unreadable: used as stored")
            oriented = im.copy()
        if oriented is not im:
            im.close()
    for record in caught:
        if issubclass(record.category, Image.DecompressionBombWarning):
            continue  # our own max_pixels check above is the rule
        text = " ".join(str(record.message).split())[:120]
        note = f"decoder: {text}"
        if note not in notes:
            notes.append(note)
    return oriented, fmt, icc


def _header_size(fp) -> tuple[int, int] | None:
    """Width and height from the header alone, as ``Image.open`` would read them, minus its bomb check.

    Pillow raises ``DecompressionBombError`` without saying the dimensions; the plugin registry
    (``Image.ID`` / ``Image.OPEN``) lets us parse the header again to name them.
    """
    fp.seek(0)
    prefix = fp.read(16)
    for fmt in Image.ID:
        factory, accept = Image.OPEN[fmt]
        try:
            if accept is not None and not accept(prefix):
                continue
            fp.seek(0)
            im = factory(fp, "")
        except Exception:
            continue
        size = im.size
        im.close()
        return size
    return None


def _too_large(size, pillow_message: str, max_pixels: int) -> str:
    limit = _format_px(max_pixels)
    if size is not None:
        w, h = size
        return f"image too large: {w} x {h} = {_format_px(w * h)} exceeds the {limit} limit"
    m = _BOMB_MESSAGE.search(pillow_message)
    if m:
        return f"image too large: {_format_px(int(m.group(1)))} exceeds the {limit} limit"
    return f"image too large: exceeds the {limit} limit"


def _frame_count(im, notes: list[str]) -> int:
    try:
        n = int(getattr(im, "n_frames", 1))
        if n > 1:
            im.seek(0)
        return n
    except Exception:  # counting walks the whole file; a damaged later frame is not fatal
        try:
            im.seek(0)
        except Exception:
            raise ImageRejected("truncated or corrupt image data") from None
        notes.append("frame count unreadable: first frame used")
        return 1


def _format_px(n: int) -> str:
    for scale, unit in ((1e9, "Gpx"), (1e6, "Mpx"), (1e3, "kpx")):
        if n >= scale:
            return f"{n / scale:.3g} {unit}"
    return f"{n} px"


# --------------------------------------------------------------------------------------------------
# Pixel modes, colour profiles and alpha


def _finish(im, fmt: str, icc: bytes | None, background, notes: list[str]) -> DecodedImage:
    try:
        colour, alpha = _to_8bit(im, notes)
    except MemoryError:
        raise ImageRejected("image too large to decode in memory") from None
    except ImageRejected:
        raise
    except (ValueError, OSError) as exc:
        raise ImageRejected(f"unsupported pixel format {im.mode!r}") from exc
    if colour.mode == "LAB":
        colour = _lab_to_srgb(colour, notes)
    elif icc is not None:
        colour = _apply_icc(colour, icc, notes)
    if colour.mode == "CMYK":
        notes.append("CMYK converted without a colour profile: colours approximate")
        colour = colour.convert("RGB")
    pixels = np.array(colour, dtype=np.uint8)
    if alpha is not None and alpha.min() < 255:
        pixels = _composite(pixels, alpha, background)
        notes.append("alpha composited over #%02x%02x%02x" % background)
    pixels = np.ascontiguousarray(pixels)
    return DecodedImage(
        pixels=pixels,
        warnings=notes,
        source_format=fmt,
        original_size=(int(pixels.shape[1]), int(pixels.shape[0])),
    )


def _to_8bit(im, notes: list[str]):
    """Return (image in mode L, RGB, CMYK or LAB, alpha array (H, W) uint8 or None)."""
    mode = im.mode
    key = im.info.get("transparency")
    if mode == "1":
        gray = im.convert("L")
        alpha = None
        if isinstance(key, int):  # colour-key transparency on a 1-bit image
            alpha = np.where(np.asarray(gray) == (255 if key else 0), 0, 255).astype(np.uint8)
        return gray, alpha
    if mode in ("L", "RGB"):
        if key is not None:
            with_alpha = im.convert("LA" if mode == "L" else "RGBA")
            return with_alpha.convert(mode), np.array(with_alpha.getchannel("A"))
        return im, None
    if mode in ("P", "PA"):
        if mode == "PA" or key is not None:
            rgba = im.convert("RGBA")
            return rgba.convert("RGB"), np.array(rgba.getchannel("A"))
        return im.convert("RGB"), None
    if mode in ("RGBA", "RGBa", "LA", "La"):
        full = im.convert("LA" if mode.startswith("L") else "RGBA")  # un-premultiplies RGBa / La
        return full.convert(full.mode[:-1]), np.array(full.getchannel("A"))
    if mode in ("I;16", "I;16L", "I;16B", "I;16N", "I", "F"):
        return _scale_gray(im, key, notes)
    if mode in ("CMYK", "LAB"):
        return im, None
    # YCbCr, HSV, RGBX and the rest: Pillow knows the way to RGB, or raises ValueError.
    return im.convert("RGB"), None


def _scale_gray(im, key, notes: list[str]):
    arr = np.asarray(im)
    alpha = None
    if isinstance(key, (int, float)) and not isinstance(key, bool):
        alpha = np.where(arr == key, 0, 255).astype(np.uint8)
    if im.mode.startswith("I;16"):
        out = (arr.astype(np.uint32) * 255 + 32767) // 65535
        notes.append("16-bit samples reduced to 8 bits")
    else:
        a = arr.astype(np.float64)
        finite = np.isfinite(a)
        if not finite.all():
            notes.append("non-finite samples set to black")
            a = np.where(finite, a, 0.0)
        lo, hi = float(a.min()), float(a.max())
        if im.mode == "F" and lo >= 0.0 and hi <= 1.0:
            out = np.rint(a * 255.0)  # the usual convention for float images
            notes.append("floating-point samples scaled from 0..1 to 8 bits")
        elif lo >= 0.0 and hi <= 255.0:
            out = np.rint(a)
        elif lo >= 0.0 and hi <= 65535.0:
            out = np.rint(a * (255.0 / 65535.0))
            notes.append("samples scaled from the 16-bit range to 8 bits")
        else:
            out = np.rint((a - lo) * (255.0 / (hi - lo)))
            notes.append(f"samples stretched from {lo:g}..{hi:g} to 8 bits")
    return Image.fromarray(np.clip(out, 0, 255).astype(np.uint8)), alpha


@functools.lru_cache(maxsize=1)
def _srgb_profile():
    return ImageCms.ImageCmsProfile(ImageCms.createProfile("sRGB"))


@functools.lru_cache(maxsize=32)
def _transform_from(icc: bytes | None, in_mode: str):
    """A cached LittleCMS transform to sRGB; ``icc=None`` means the built-in CIELAB (D50) profile."""
    src = ImageCms.ImageCmsProfile(io.BytesIO(icc)) if icc else ImageCms.createProfile("LAB")
    return ImageCms.buildTransform(src, _srgb_profile(), in_mode, "RGB")


@functools.lru_cache(maxsize=32)
def _gray_lut(icc: bytes) -> np.ndarray:
    """256-entry gray -> sRGB gray table from an unoptimized transform.

    LittleCMS's optimized 8-bit gray pipeline is several levels off in the deep shadows; one exact
    pass over the 256 possible values, then a lookup, is both exact and fast.
    """
    src = ImageCms.ImageCmsProfile(io.BytesIO(icc))
    no_optimize = ImageCms.Flags.NOOPTIMIZE if hasattr(ImageCms, "Flags") else 0x0100  # Pillow < 10.3
    transform = ImageCms.buildTransform(src, _srgb_profile(), "L", "RGB", flags=no_optimize)
    ramp = Image.fromarray(np.arange(256, dtype=np.uint8)[None, :])
    rgb = np.asarray(ImageCms.applyTransform(ramp, transform), dtype=np.float64)[0]
    return np.rint(rgb.mean(axis=1)).astype(np.uint8)


_PROFILE_SPACE = {"L": "GRAY", "RGB": "RGB", "CMYK": "CMYK"}


def _apply_icc(img, icc: bytes, notes: list[str]):
    """Convert ``img`` (mode L, RGB or CMYK) from its embedded profile to sRGB."""
    if ImageCms is None:  # pragma: no cover - depends on the Pillow build
        notes.append("colour profile ignored: no colour management in this Pillow build")
        return img
    try:
        prof = ImageCms.ImageCmsProfile(io.BytesIO(icc))
        space = (prof.profile.xcolor_space or "").strip()
        desc = prof.profile.profile_description or ""
    except Exception:
        notes.append("colour profile unreadable: pixels used as stored")
        return img
    if space != _PROFILE_SPACE.get(img.mode):
        notes.append(f"colour profile is for {space or 'an unknown'} data, not {img.mode}: ignored")
        return img
    if space == "RGB" and "srgb" in desc.lower():
        return img  # already sRGB; converting would only add rounding
    try:
        if img.mode == "L":
            out = Image.fromarray(_gray_lut(icc)[np.asarray(img)])
        else:
            out = ImageCms.applyTransform(img, _transform_from(icc, img.mode))
    except Exception:
        notes.append("colour profile could not be applied: pixels used as stored")
        return img
    notes.append("embedded colour profile converted to sRGB")
    return out


def _lab_to_srgb(img, notes: list[str]):
    if ImageCms is not None:
        try:
            return ImageCms.applyTransform(img, _transform_from(None, "LAB"))
        except Exception:
            pass
    notes.append("CIELAB converted without colour management: colours approximate")
    return img.convert("RGB")


def _composite(pixels: np.ndarray, alpha: np.ndarray, background) -> np.ndarray:
    """Straight-alpha "over" onto an opaque background, rounded to nearest, in uint16."""
    if pixels.ndim == 2 and len(set(background)) != 1:
        pixels = np.repeat(pixels[:, :, None], 3, axis=2)  # a coloured background makes it colour
    if pixels.ndim == 2:
        a = alpha.astype(np.uint16)
        bg = np.uint16(background[0])
    else:
        a = alpha.astype(np.uint16)[:, :, None]
        bg = np.asarray(background, dtype=np.uint16)
    x = pixels * a  # at most 255 * 255, so uint16 holds every step below
    x += bg * (255 - a)
    # round(x / 255) without a division: exact for 0 <= x <= 255 * 255 (checked for all of them).
    x += 128
    x += x >> 8
    return (x >> 8).astype(np.uint8)


# --------------------------------------------------------------------------------------------------
# Validation


def _check_background(background) -> tuple[int, int, int]:
    try:
        values = tuple(background)
    except TypeError:
        values = ()
    if len(values) != 3 or not all(
        isinstance(v, (int, np.integer)) and not isinstance(v, bool) and 0 <= v <= 255 for v in values
    ):
        raise ValueError(f"background must be three integers 0..255 (r, g, b), got {background!r}")
    return tuple(int(v) for v in values)


def _check_pixels(pixels) -> np.ndarray:
    if not isinstance(pixels, np.ndarray):
        raise ValueError(f"pixels must be a numpy array, got {type(pixels).__name__!r}")
    if pixels.dtype != np.uint8:
        raise ValueError(f"pixels must have dtype uint8, got {pixels.dtype!r}")
    if not (pixels.ndim == 2 or (pixels.ndim == 3 and pixels.shape[2] == 3)):
        raise ValueError(f"pixels must have shape (H, W) or (H, W, 3), got {pixels.shape!r}")
    if pixels.shape[0] < 1 or pixels.shape[1] < 1:
        raise ValueError(f"pixels must be at least 1 x 1, got shape {pixels.shape!r}")
    return pixels
