"""Tests for dct.io: decoding uploads, resizing, and Pillow encoding with the engine's tables.

Every input is built here from scratch with numpy/Pillow or by writing file bytes by hand following
the format's standard; nothing is downloaded.
"""

from __future__ import annotations

import io
import os
import stat
import struct
import time
import zlib

import numpy as np
import pytest
from PIL import Image, ImageCms, JpegImagePlugin

from dct.io import (
    MAX_PIXELS,
    DecodedImage,
    ImageRejected,
    decode_image,
    encode_jpeg,
    encode_png,
    resize_to_width,
)
from dct.tables import quant_tables
from tests.jpeg_markers import segments

RNG = np.random.default_rng(20240611)


# --------------------------------------------------------------------------------------------------
# Helpers: hand-written file bytes


def png_chunk(kind: bytes, data: bytes) -> bytes:
    """A PNG chunk: length, type, data, CRC-32 over type+data (ISO/IEC 15948, section 5.3)."""
    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))


def raw_png(width: int, height: int, *, bit_depth: int, colour_type: int, rows: bytes | None) -> bytes:
    """A PNG with filter type 0 on every row; ``rows=None`` writes a tiny IDAT that cannot fill the image."""
    ihdr = struct.pack(">IIBBBBB", width, height, bit_depth, colour_type, 0, 0, 0)
    idat = zlib.compress(rows if rows is not None else b"\x00" * 16)
    return b"\x89PNG\r\n\x1a\n" + png_chunk(b"IHDR", ihdr) + png_chunk(b"IDAT", idat) + png_chunk(b"IEND", b"")


def png_chunk_types(data: bytes) -> list[bytes]:
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    pos, kinds = 8, []
    while pos < len(data):
        (length,) = struct.unpack(">I", data[pos : pos + 4])
        kinds.append(data[pos + 4 : pos + 8])
        pos += 12 + length
    return kinds


def s15f16(x: float) -> bytes:
    return struct.pack(">i", int(round(x * 65536)))


def xyz_tag(x: float, y: float, z: float) -> bytes:
    return b"XYZ " + b"\0" * 4 + s15f16(x) + s15f16(y) + s15f16(z)


def desc_tag(text: str) -> bytes:
    # ICC.1:2001-04 textDescriptionType: ASCII part, empty Unicode and ScriptCode parts.
    ascii_ = text.encode("ascii") + b"\0"
    return (
        b"desc" + b"\0" * 4 + struct.pack(">I", len(ascii_)) + ascii_
        + struct.pack(">II", 0, 0) + struct.pack(">HB", 0, 0) + b"\0" * 67
    )


def identity_curve() -> bytes:
    return b"curv" + b"\0" * 4 + struct.pack(">I", 0)  # count 0 = identity (ICC.1 curveType)


D50 = (0.9642, 1.0, 0.8249)  # ICC PCS illuminant (ICC.1 section 6.3.4.3)
# Colorants of the sRGB primaries adapted to D50 (Bradford), as in the sRGB IEC61966-2.1 ICC
# profile; from memory, cross-checked below by summing to the D50 white.
SRGB_D50_COLORANTS = {
    b"rXYZ": (0.4361, 0.2225, 0.0139),
    b"gXYZ": (0.3851, 0.7169, 0.0971),
    b"bXYZ": (0.1431, 0.0606, 0.7141),
}


def icc_profile(space: bytes, tags: dict[bytes, bytes]) -> bytes:
    """A version 2 display ('mntr') ICC profile, laid out per ICC.1:2001-04 sections 6.1-6.2."""
    offset = 128 + 4 + 12 * len(tags)
    table, body = b"", b""
    for sig, data in tags.items():
        data += b"\0" * (-len(data) % 4)
        table += sig + struct.pack(">II", offset + len(body), len(data))
        body += data
    size = offset + len(body)
    header = (
        struct.pack(">I", size) + b"\0" * 4 + struct.pack(">I", 0x02100000) + b"mntr" + space + b"XYZ "
        + struct.pack(">6H", 2024, 1, 1, 0, 0, 0) + b"acsp" + b"\0" * 24 + struct.pack(">I", 0)
        + s15f16(D50[0]) + s15f16(D50[1]) + s15f16(D50[2]) + b"\0" * 48
    )
    assert len(header) == 128
    return header + struct.pack(">I", len(tags)) + table + body


def linear_rgb_profile() -> bytes:
    """sRGB primaries with linear (gamma 1.0) tone curves: a real 'linear-light sRGB' profile."""
    tags = {b"desc": desc_tag("Linear RGB test profile"), b"wtpt": xyz_tag(*D50)}
    tags.update({sig: xyz_tag(*v) for sig, v in SRGB_D50_COLORANTS.items()})
    tags.update({sig: identity_curve() for sig in (b"rTRC", b"gTRC", b"bTRC")})
    return icc_profile(b"RGB ", tags)


def linear_gray_profile() -> bytes:
    return icc_profile(b"GRAY", {b"desc": desc_tag("Linear gray"), b"wtpt": xyz_tag(*D50), b"kTRC": identity_curve()})


def srgb_encode(linear: np.ndarray) -> np.ndarray:
    """IEC 61966-2-1 sRGB transfer function, linear 0..1 to 0..255."""
    v = np.where(linear <= 0.0031308, 12.92 * linear, 1.055 * np.power(linear, 1 / 2.4) - 0.055)
    return v * 255.0


def save(img: Image.Image, fmt: str, **params) -> bytes:
    buf = io.BytesIO()
    img.save(buf, fmt, **params)
    return buf.getvalue()


# JPEG marker parsing (ITU-T T.81 Annex B), independent of Pillow.

# ITU-T T.81 Figure A.6: zigzag position k -> natural (row-major) index.
T81_ZIGZAG = [
    0, 1, 8, 16, 9, 2, 3, 10, 17, 24, 32, 25, 18, 11, 4, 5,
    12, 19, 26, 33, 40, 48, 41, 34, 27, 20, 13, 6, 7, 14, 21, 28,
    35, 42, 49, 56, 57, 50, 43, 36, 29, 22, 15, 23, 30, 37, 44, 51,
    58, 59, 52, 45, 38, 31, 39, 46, 53, 60, 61, 54, 47, 55, 62, 63,
]


def jpeg_segments(data: bytes) -> list[tuple[int, bytes]]:
    """(marker, payload) for each marker segment up to SOS (ITU-T T.81 Annex B)."""
    return list(segments(data))


def dqt_tables(data: bytes) -> dict[int, np.ndarray]:
    """Destination id -> 8x8 natural-order table from DQT segments (B.2.4.1), 8-bit precision."""
    tables = {}
    for marker, payload in jpeg_segments(data):
        if marker != 0xDB:
            continue
        pos = 0
        while pos < len(payload):
            pq, tq = payload[pos] >> 4, payload[pos] & 15
            assert pq == 0, "8-bit baseline tables expected"
            zz = payload[pos + 1 : pos + 65]
            natural = np.zeros(64, dtype=np.int32)
            natural[T81_ZIGZAG] = list(zz)
            tables[tq] = natural.reshape(8, 8)
            pos += 65
    return tables


def frame_header(data: bytes) -> tuple[int, list[tuple[int, int, int, int]]]:
    """(SOF marker, [(component id, H, V, Tq)]) from the frame header (B.2.2)."""
    for marker, payload in jpeg_segments(data):
        if 0xC0 <= marker <= 0xCF and marker not in (0xC4, 0xC8, 0xCC):
            n = payload[5]
            comps = [
                (payload[6 + 3 * i], payload[7 + 3 * i] >> 4, payload[7 + 3 * i] & 15, payload[8 + 3 * i])
                for i in range(n)
            ]
            return marker, comps
    raise AssertionError("no frame header")


def smooth_rgb(h: int, w: int) -> np.ndarray:
    y, x = np.mgrid[0:h, 0:w]
    return np.stack(
        [(x * 255 // max(w - 1, 1)), (y * 255 // max(h - 1, 1)), ((x + y) * 255 // max(h + w - 2, 1))], axis=2
    ).astype(np.uint8)


# --------------------------------------------------------------------------------------------------
# Plain decoding


def test_rgb_png_from_path_and_bytes_is_exact(tmp_path):
    arr = RNG.integers(0, 256, (17, 23, 3), dtype=np.uint8)
    path = tmp_path / "a.png"
    Image.fromarray(arr).save(path)
    for source in (path, str(path), path.read_bytes(), bytearray(path.read_bytes())):
        d = decode_image(source)
        assert isinstance(d, DecodedImage)
        np.testing.assert_array_equal(d.pixels, arr)
        assert d.pixels.dtype == np.uint8 and d.pixels.flags.c_contiguous and d.pixels.flags.writeable
        assert d.source_format == "PNG" and d.original_size == (23, 17) and d.warnings == []


def test_grayscale_stays_two_dimensional():
    arr = RNG.integers(0, 256, (9, 14), dtype=np.uint8)
    d = decode_image(save(Image.fromarray(arr), "PNG"))
    assert d.pixels.shape == (9, 14)
    np.testing.assert_array_equal(d.pixels, arr)
    # A grayscale JPEG is one component and stays 2-D as well.
    dj = decode_image(save(Image.fromarray(arr), "JPEG", quality=95))
    assert dj.pixels.shape == (9, 14) and dj.source_format == "JPEG"


def test_one_bit_image_becomes_black_and_white():
    bits = RNG.integers(0, 2, (8, 13)).astype(bool)
    d = decode_image(save(Image.fromarray(bits), "PNG"))
    assert d.pixels.shape == (8, 13)
    np.testing.assert_array_equal(d.pixels, np.where(bits, 255, 0))


def test_palette_image_becomes_its_palette_colours():
    palette = RNG.integers(0, 256, (256, 3), dtype=np.uint8)
    index = RNG.integers(0, 256, (10, 12), dtype=np.uint8)
    img = Image.fromarray(index, "L").convert("P")
    img.putpalette(palette.ravel().tolist())
    d = decode_image(save(img, "PNG"))
    np.testing.assert_array_equal(d.pixels, palette[index])
    assert d.warnings == []


def test_16_bit_grayscale_png_is_scaled_to_8_bits():
    # ISO/IEC 15948 (PNG) section 12.5 / 13.12: rescale samples by (2^8 - 1) / (2^16 - 1).
    values = np.array([[0, 1, 128, 257, 32767], [32768, 40000, 65279, 65534, 65535]], dtype=np.uint16)
    d = decode_image(save(Image.fromarray(values), "PNG"))
    assert d.pixels.shape == values.shape
    np.testing.assert_array_equal(d.pixels, np.rint(values.astype(float) * 255 / 65535))
    assert "16-bit samples reduced to 8 bits" in d.warnings


def test_16_bit_grayscale_big_endian_raw_png():
    values = np.array([[0, 1000, 50000], [65535, 12345, 257]], dtype=">u2")
    rows = b"".join(b"\x00" + row.tobytes() for row in values)  # PNG stores 16-bit samples MSB first
    d = decode_image(raw_png(3, 2, bit_depth=16, colour_type=0, rows=rows))
    np.testing.assert_array_equal(d.pixels, np.rint(values.astype(float) * 255 / 65535))


def test_16_bit_rgb_png_written_by_hand():
    values = RNG.integers(0, 65536, (5, 6, 3)).astype(">u2")
    rows = b"".join(b"\x00" + row.tobytes() for row in values)
    d = decode_image(raw_png(6, 5, bit_depth=16, colour_type=2, rows=rows))
    assert d.pixels.shape == (5, 6, 3)
    # Any sane 16 -> 8 bit reduction (high byte, or rounding by 257) lands within one level.
    expected = values.astype(float) * 255 / 65535
    assert np.max(np.abs(d.pixels - expected)) <= 1.0


def test_int32_and_float_tiffs_are_scaled_sensibly():
    # 'I' holding 16-bit-range values: scaled by 255/65535 (same rule as 16-bit PNG above).
    ivals = np.array([[0, 1000, 65535], [300, 30000, 257]], dtype=np.int32)
    d = decode_image(save(Image.fromarray(ivals, "I"), "TIFF"))
    np.testing.assert_array_equal(d.pixels, np.rint(ivals * 255 / 65535))
    assert any("16-bit range" in w for w in d.warnings)
    # 'F' in 0..1: common practice for floating-point images; scaled by 255.
    fvals = np.array([[0.0, 0.25, 0.5], [0.75, 1.0, 0.1]], dtype=np.float32)
    d = decode_image(save(Image.fromarray(fvals, "F"), "TIFF"))
    np.testing.assert_array_equal(d.pixels, np.rint(fvals * 255))
    # 'F' outside any usual range: stretched min..max with a warning.
    fwide = np.array([[-10.0, 0.0], [10.0, 30.0]], dtype=np.float32)
    d = decode_image(save(Image.fromarray(fwide, "F"), "TIFF"))
    np.testing.assert_array_equal(d.pixels, np.rint((fwide + 10) * 255 / 40))
    assert any("stretched" in w for w in d.warnings)


def test_cmyk_jpeg_becomes_rgb():
    # Cyan, magenta, yellow, black, white in CMYK; the uncalibrated conversion is
    # R = (1 - C)(1 - K), G = (1 - M)(1 - K), B = (1 - Y)(1 - K) (common practice).
    inks = [(255, 0, 0, 0), (0, 255, 0, 0), (0, 0, 255, 0), (0, 0, 0, 255), (0, 0, 0, 0)]
    expected = [(0, 255, 255), (255, 0, 255), (255, 255, 0), (0, 0, 0), (255, 255, 255)]
    img = Image.new("CMYK", (16 * len(inks), 16))
    for i, ink in enumerate(inks):
        img.paste(ink, (16 * i, 0, 16 * i + 16, 16))
    d = decode_image(save(img, "JPEG", quality=95))
    assert d.pixels.shape == (16, 80, 3) and d.source_format == "JPEG"
    for i, rgb in enumerate(expected):
        patch = d.pixels[4:12, 16 * i + 4 : 16 * i + 12].reshape(-1, 3).mean(axis=0)
        np.testing.assert_allclose(patch, rgb, atol=6)
    assert any("CMYK" in w for w in d.warnings)


def test_ycbcr_tiff_becomes_rgb():
    rgb = smooth_rgb(16, 16)
    img = Image.fromarray(rgb).convert("YCbCr")
    d = decode_image(save(img, "TIFF"))
    assert d.pixels.shape == (16, 16, 3)
    # ITU-T T.871 (JFIF) YCbCr <-> RGB, 8-bit round trip: within a couple of levels.
    assert np.max(np.abs(d.pixels.astype(int) - rgb)) <= 3


def test_lab_tiff_becomes_srgb():
    # Pillow's LAB mode and TIFF's CIELAB photometric (TIFF 6.0 section 23) hold L* as 0..255 for
    # 0..100 and a*, b* as signed 8-bit. CIE 1976: L* = 50 is Y = ((50 + 16) / 116)^3 = 0.1842, which
    # sRGB (IEC 61966-2-1) encodes as 118.9; L* = 100 is white; a* = b* = 0 is neutral, so the
    # D50 -> D65 adaptation does not move it. +a* is towards red, -b* towards blue.
    lab = np.zeros((2, 4, 3), dtype=np.uint8)
    lab[:, 0] = (128, 0, 0)  # L* = 128 / 255 * 100 = 50.2
    lab[:, 1] = (255, 0, 0)
    lab[:, 2] = (128, 40, 0)
    lab[:, 3] = (128, 0, (-40) & 0xFF)  # two's complement
    d = decode_image(save(Image.frombytes("LAB", (4, 2), lab.tobytes()), "TIFF"))
    assert d.pixels.shape == (2, 4, 3)
    y = ((128 / 255 * 100 + 16) / 116) ** 3
    assert abs(y - ((50 + 16) / 116) ** 3) < 0.005
    assert np.all(np.abs(d.pixels[:, 0].astype(float) - srgb_encode(np.array(y))) <= 2)
    assert np.all(d.pixels[:, 1] >= 252)
    red, blue = d.pixels[0, 2].astype(int), d.pixels[0, 3].astype(int)
    assert red[0] > red[1] + 40 and blue[2] > blue[0] + 40


# --------------------------------------------------------------------------------------------------
# EXIF orientation


def exif_with_orientation(value: int) -> bytes:
    exif = Image.Exif()
    exif[0x0112] = value
    return exif.tobytes()


@pytest.mark.parametrize(
    "orientation, expected",
    [
        # CIPA DC-008 (Exif 2.3) tag 0x0112: 3 = rotate 180, 6 = rotate 90 clockwise to display,
        # 8 = rotate 90 counter-clockwise, 2 = mirror left-right.
        (1, lambda a: a),
        (2, lambda a: a[:, ::-1]),
        (3, lambda a: a[::-1, ::-1]),
        (6, lambda a: np.rot90(a, k=-1)),
        (8, lambda a: np.rot90(a, k=1)),
    ],
)
def test_exif_orientation_is_applied(orientation, expected):
    arr = RNG.integers(0, 256, (3, 5, 3), dtype=np.uint8)  # 5 wide, 3 tall: every turn is visible
    data = save(Image.fromarray(arr), "PNG", exif=exif_with_orientation(orientation))
    d = decode_image(data)
    np.testing.assert_array_equal(d.pixels, expected(arr))
    assert d.original_size == (d.pixels.shape[1], d.pixels.shape[0])


def test_exif_orientation_6_on_a_jpeg_turns_the_left_half_to_the_top():
    arr = np.zeros((16, 32, 3), dtype=np.uint8)
    arr[:, :16] = (220, 30, 30)  # left half red
    arr[:, 16:] = (30, 30, 220)  # right half blue
    d = decode_image(save(Image.fromarray(arr), "JPEG", quality=95, exif=exif_with_orientation(6)))
    assert d.original_size == (16, 32)
    # Rotating 90 degrees clockwise puts the stored left edge at the top.
    top, bottom = d.pixels[2:14].reshape(-1, 3).mean(0), d.pixels[18:30].reshape(-1, 3).mean(0)
    assert top[0] > 180 and top[2] < 70 and bottom[2] > 180 and bottom[0] < 70


def test_gps_metadata_never_reaches_the_result():
    exif = Image.Exif()
    exif[0x0112] = 1
    exif[0x010F] = "FernridgeCam"  # Make
    gps = exif.get_ifd(0x8825)
    gps[1], gps[2] = "N", (47.0, 30.0, 12.5)
    data = save(Image.fromarray(smooth_rgb(8, 8)), "JPEG", exif=exif.tobytes())
    assert b"FernridgeCam" in data  # the source really carries it
    d = decode_image(data)
    assert type(d.pixels) is np.ndarray
    assert not any("Fernridge" in w for w in d.warnings)
    png = encode_png(d.pixels)
    assert b"FernridgeCam" not in png and set(png_chunk_types(png)) == {b"IHDR", b"IDAT", b"IEND"}


# --------------------------------------------------------------------------------------------------
# ICC profiles


def test_colorants_sum_to_the_pcs_white():
    # A matrix profile's colorants add up to its white (ICC.1 Annex F); catches a mistyped value.
    total = np.sum(list(SRGB_D50_COLORANTS.values()), axis=0)
    np.testing.assert_allclose(total, D50, atol=3e-4)


def test_srgb_tagged_image_passes_unchanged():
    arr = RNG.integers(0, 256, (12, 12, 3), dtype=np.uint8)
    srgb = ImageCms.ImageCmsProfile(ImageCms.createProfile("sRGB")).tobytes()
    d = decode_image(save(Image.fromarray(arr), "PNG", icc_profile=srgb))
    np.testing.assert_array_equal(d.pixels, arr)
    assert d.warnings == []


def test_linear_rgb_profile_is_converted_to_srgb():
    ramp = np.arange(0, 256, 5, dtype=np.uint8)
    arr = np.stack([ramp, ramp[::-1], np.full_like(ramp, 64)], axis=1)[None, :, :]
    d = decode_image(save(Image.fromarray(arr), "PNG", icc_profile=linear_rgb_profile()))
    # Same primaries, so each channel is just re-encoded with the IEC 61966-2-1 curve.
    expected = srgb_encode(arr / 255.0)
    assert np.max(np.abs(d.pixels - expected)) <= 2.0
    assert np.max(np.abs(d.pixels.astype(int) - arr)) > 50  # it really moved
    assert "embedded colour profile converted to sRGB" in d.warnings


def test_linear_gray_profile_is_converted_and_stays_grayscale():
    arr = np.arange(0, 256, 4, dtype=np.uint8).reshape(8, 8)
    d = decode_image(save(Image.fromarray(arr), "PNG", icc_profile=linear_gray_profile()))
    assert d.pixels.shape == (8, 8)
    assert np.max(np.abs(d.pixels - srgb_encode(arr / 255.0))) <= 2.0


def test_icc_profile_on_a_jpeg_is_converted():
    arr = np.full((16, 16, 3), 64, dtype=np.uint8)
    d = decode_image(save(Image.fromarray(arr), "JPEG", quality=100, icc_profile=linear_rgb_profile()))
    assert np.all(np.abs(d.pixels - srgb_encode(np.array(64 / 255))) <= 3)


@pytest.mark.parametrize(
    "profile, expect",
    [
        (lambda: ImageCms.ImageCmsProfile(ImageCms.createProfile("LAB")).tobytes(), "not RGB"),
        (lambda: b"this is not an ICC profile at all" * 8, "unreadable"),
        (lambda: linear_gray_profile(), "not RGB"),
    ],
)
def test_unusable_profile_warns_and_keeps_pixels(profile, expect):
    arr = RNG.integers(0, 256, (6, 6, 3), dtype=np.uint8)
    d = decode_image(save(Image.fromarray(arr), "PNG", icc_profile=profile()))
    np.testing.assert_array_equal(d.pixels, arr)
    assert len(d.warnings) == 1 and expect in d.warnings[0]


# --------------------------------------------------------------------------------------------------
# Alpha


def over(rgb: np.ndarray, alpha: np.ndarray, bg) -> np.ndarray:
    """Porter & Duff (1984) 'over' onto an opaque background, straight alpha."""
    a = alpha.astype(float)[..., None] / 255.0
    return rgb * a + np.asarray(bg, float) * (1 - a)


@pytest.mark.parametrize("bg", [(255, 255, 255), (10, 200, 40)])
def test_rgba_is_composited_over_the_background(bg):
    rgba = RNG.integers(0, 256, (7, 9, 4), dtype=np.uint8)
    rgba[0, 0, 3], rgba[0, 1, 3] = 0, 255
    d = decode_image(save(Image.fromarray(rgba), "PNG"), background=bg)
    assert d.pixels.shape == (7, 9, 3)
    assert np.max(np.abs(d.pixels - over(rgba[..., :3], rgba[..., 3], bg))) <= 0.5 + 1e-9
    np.testing.assert_array_equal(d.pixels[0, 0], bg)
    np.testing.assert_array_equal(d.pixels[0, 1], rgba[0, 1, :3])
    assert d.warnings == ["alpha composited over #%02x%02x%02x" % bg]


def test_compositing_rounds_every_case_to_nearest():
    # Every (colour, alpha) pair over black and over white: round(c * a / 255 + bg * (1 - a / 255)).
    c, a = np.meshgrid(np.arange(256), np.arange(256), indexing="ij")
    rgba = np.stack([c, c, c, a], axis=2).astype(np.uint8)
    for bg in ((0, 0, 0), (255, 255, 255), (7, 130, 250)):
        d = decode_image(save(Image.fromarray(rgba), "PNG"), background=bg)
        exact = over(rgba[..., :3].astype(float), rgba[..., 3], bg)
        np.testing.assert_array_equal(d.pixels, np.floor(exact + 0.5))


def test_opaque_alpha_is_dropped_without_a_warning():
    rgba = RNG.integers(0, 256, (5, 5, 4), dtype=np.uint8)
    rgba[..., 3] = 255
    d = decode_image(save(Image.fromarray(rgba), "PNG"))
    np.testing.assert_array_equal(d.pixels, rgba[..., :3])
    assert d.warnings == []


def test_la_over_gray_stays_gray_and_over_colour_becomes_rgb():
    la = RNG.integers(0, 256, (6, 8, 2), dtype=np.uint8)
    data = save(Image.fromarray(la, "LA"), "PNG")
    d = decode_image(data, background=(128, 128, 128))
    assert d.pixels.shape == (6, 8)
    assert np.max(np.abs(d.pixels - over(la[..., :1], la[..., 1], (128,))[..., 0])) <= 0.5 + 1e-9
    d = decode_image(data, background=(255, 0, 0))
    assert d.pixels.shape == (6, 8, 3)
    gray3 = np.repeat(la[..., :1], 3, axis=2)
    assert np.max(np.abs(d.pixels - over(gray3, la[..., 1], (255, 0, 0)))) <= 0.5 + 1e-9


def test_palette_with_transparency_png_and_gif():
    index = np.array([[0, 1, 2], [2, 1, 0]], dtype=np.uint8)
    img = Image.fromarray(index, "L").convert("P")
    img.putpalette([255, 0, 0, 0, 255, 0, 0, 0, 255] + [0] * 759)
    for fmt in ("PNG", "GIF"):
        d = decode_image(save(img, fmt, transparency=1), background=(9, 9, 9))
        assert d.source_format == fmt
        np.testing.assert_array_equal(d.pixels[0], [(255, 0, 0), (9, 9, 9), (0, 0, 255)])
        assert d.warnings == ["alpha composited over #090909"]


def test_colour_key_transparency_on_rgb_png():
    arr = np.array([[(1, 2, 3), (200, 100, 50)]], dtype=np.uint8)
    d = decode_image(save(Image.fromarray(arr), "PNG", transparency=(1, 2, 3)), background=(0, 0, 0))
    np.testing.assert_array_equal(d.pixels, [[(0, 0, 0), (200, 100, 50)]])
    assert d.warnings == ["alpha composited over #000000"]


# --------------------------------------------------------------------------------------------------
# Animation and multi-image files


def test_animated_gif_gives_the_first_frame():
    colours = [(200, 0, 0), (0, 200, 0), (0, 0, 200)]
    frames = [Image.new("RGB", (6, 4), c) for c in colours]
    data = save(frames[0], "GIF", save_all=True, append_images=frames[1:], duration=100, loop=0)
    d = decode_image(data)
    assert d.source_format == "GIF" and d.pixels.shape == (4, 6, 3)
    assert np.all(d.pixels == colours[0])
    assert "animated: first of 3 frames used" in d.warnings


def test_animated_png_gives_the_first_frame():
    frames = [Image.new("RGB", (5, 5), (i * 60, 10, 10)) for i in range(4)]
    data = save(frames[0], "PNG", save_all=True, append_images=frames[1:])
    d = decode_image(data)
    assert np.all(d.pixels == (0, 10, 10))
    assert "animated: first of 4 frames used" in d.warnings


def test_multi_picture_jpeg_reports_jpeg():
    first = Image.fromarray(smooth_rgb(16, 16))
    data = save(first, "MPO", save_all=True, append_images=[Image.new("RGB", (16, 16), (0, 0, 0))])
    d = decode_image(data)
    assert d.source_format == "JPEG"
    assert "multi-picture JPEG: first of 2 images used" in d.warnings
    assert np.abs(d.pixels.astype(int) - smooth_rgb(16, 16)).mean() < 4


# --------------------------------------------------------------------------------------------------
# Rejections


def test_decompression_bomb_png_header_is_refused_before_decoding():
    # IHDR declares 40000 x 40000 RGB; the IDAT holds 16 bytes. Decoding would need 4.8 GB.
    data = raw_png(40000, 40000, bit_depth=8, colour_type=2, rows=None)
    start = time.perf_counter()
    with pytest.raises(ImageRejected) as info:
        decode_image(data)
    assert str(info.value) == "image too large: 40000 x 40000 = 1.6 Gpx exceeds the 50 Mpx limit"
    assert time.perf_counter() - start < 2.0


def test_decompression_bomb_gif_header_is_refused():
    # GIF89a logical screen and one image descriptor of 40000 x 40000, then a token LZW stream.
    data = (
        b"GIF89a" + struct.pack("<HHBBB", 40000, 40000, 0, 0, 0)
        + b"," + struct.pack("<HHHHB", 0, 0, 40000, 40000, 0) + b"\x02\x02\x44\x01\x00;"
    )
    with pytest.raises(ImageRejected, match=r"^image too large: 40000 x 40000 = 1\.6 Gpx exceeds the 50 Mpx limit$"):
        decode_image(data)


def test_size_in_pillows_warning_band_is_refused_not_raised():
    # 10000 x 10000 = 100 Mpx: above Pillow's warning threshold (89.5 Mpx) but under its error
    # threshold; pytest turns the warning into an error, decode_image must still say why.
    with pytest.raises(ImageRejected, match=r"10000 x 10000 = 100 Mpx exceeds the 50 Mpx limit"):
        decode_image(raw_png(10000, 10000, bit_depth=8, colour_type=0, rows=None))


def test_max_pixels_is_configurable():
    data = save(Image.new("RGB", (100, 60)), "PNG")
    with pytest.raises(ImageRejected, match=r"^image too large: 100 x 60 = 6 kpx exceeds the 5 kpx limit$"):
        decode_image(data, max_pixels=5000)
    assert decode_image(data, max_pixels=6000).pixels.shape == (60, 100, 3)
    assert MAX_PIXELS == 50_000_000


def test_truncated_jpeg_is_refused():
    data = save(Image.fromarray(RNG.integers(0, 256, (64, 64, 3), dtype=np.uint8)), "JPEG", quality=90)
    for cut in (len(data) // 2, 40):
        with pytest.raises(ImageRejected, match=r"^truncated or corrupt JPEG data$"):
            decode_image(data[:cut])


def test_truncated_png_is_refused():
    data = save(Image.fromarray(RNG.integers(0, 256, (64, 64, 3), dtype=np.uint8)), "PNG")
    with pytest.raises(ImageRejected, match=r"^truncated or corrupt PNG data$"):
        decode_image(data[: len(data) // 2])


def test_text_file_named_jpg_is_refused(tmp_path):
    path = tmp_path / "notes.jpg"
    path.write_text("Fernridge Outfitters price list\n")
    with pytest.raises(ImageRejected, match=r"^not an image file \(unrecognised format\)$"):
        decode_image(path)


def test_empty_file_and_empty_bytes_are_refused(tmp_path):
    path = tmp_path / "empty.png"
    path.write_bytes(b"")
    for source in (path, b""):
        with pytest.raises(ImageRejected, match=r"^empty file \(0 bytes\)$"):
            decode_image(source)


def test_missing_path_and_folder_are_refused(tmp_path):
    with pytest.raises(ImageRejected, match=r"^unreadable file: no such file$"):
        decode_image(tmp_path / "nope.jpg")
    with pytest.raises(ImageRejected, match=r"^unreadable file: it is a folder$"):
        decode_image(tmp_path)


@pytest.mark.timeout(10)
def test_fifo_is_refused_without_blocking(tmp_path):
    path = tmp_path / "pipe.jpg"
    os.mkfifo(path)
    with pytest.raises(ImageRejected, match=r"^unreadable file: not a regular file$"):
        decode_image(path)


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0, reason="root reads files regardless of mode")
def test_unreadable_file_is_refused(tmp_path):
    path = tmp_path / "locked.png"
    Image.new("RGB", (4, 4)).save(path)
    path.chmod(0)
    try:
        with pytest.raises(ImageRejected, match=r"^unreadable file: permission denied$"):
            decode_image(path)
    finally:
        path.chmod(stat.S_IRUSR | stat.S_IWUSR)


def test_permission_denied_is_refused_even_as_root(tmp_path, monkeypatch):
    # Root ignores permission bits, so make opening fail the way the kernel would for others.
    path = tmp_path / "locked.png"
    Image.new("RGB", (4, 4)).save(path)

    def denied(*args, **kwargs):
        raise PermissionError(13, "Permission denied", str(path))

    monkeypatch.setattr("builtins.open", denied)
    with pytest.raises(ImageRejected, match=r"^unreadable file: permission denied$"):
        decode_image(path)


def test_damaged_files_only_ever_raise_image_rejected():
    # Truncations and byte flips of every common format: either a decode or a clear rejection,
    # never an OSError / SyntaxError / struct.error escaping.
    rng = np.random.default_rng(7)
    img = Image.fromarray(rng.integers(0, 256, (24, 32, 3), dtype=np.uint8))
    flipped = img.transpose(Image.Transpose.FLIP_LEFT_RIGHT)
    sources = [
        save(img, "JPEG"), save(img, "JPEG", progressive=True), save(img, "PNG"),
        save(img, "PNG", save_all=True, append_images=[flipped]),
        save(img.convert("P"), "GIF", save_all=True, append_images=[flipped.convert("P")]),
        save(img, "WEBP"), save(img, "TIFF"), save(img, "TIFF", compression="tiff_deflate"), save(img, "BMP"),
    ]
    outcomes = set()
    for data in sources:
        variants = [data[:cut] for cut in rng.integers(1, len(data), 15)]
        for _ in range(25):
            damaged = np.frombuffer(data, dtype=np.uint8).copy()
            damaged[rng.integers(0, len(data), 3)] = rng.integers(0, 256, 3)
            variants.append(damaged.tobytes())
        for v in variants:
            try:
                d = decode_image(v)
                assert d.pixels.dtype == np.uint8 and d.pixels.ndim in (2, 3)
                outcomes.add("decoded")
            except ImageRejected as exc:
                assert "\n" not in str(exc) and len(str(exc)) < 100
                outcomes.add("rejected")
    assert outcomes == {"decoded", "rejected"}


def test_path_with_nul_byte_is_refused():
    with pytest.raises(ImageRejected, match="^unreadable file: invalid path$"):
        decode_image("bad\x00name.jpg")


def test_rejection_is_a_value_error_with_no_chained_traceback():
    with pytest.raises(ValueError) as info:
        decode_image(b"\x00\x01garbage")
    assert isinstance(info.value, ImageRejected)
    assert info.value.__cause__ is None and info.value.__suppress_context__


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"background": (256, 0, 0)}, r"background must be three integers 0\.\.255"),
        ({"background": "white"}, r"background must be three integers"),
        ({"max_pixels": 0}, r"max_pixels must be a positive integer, got 0"),
    ],
)
def test_bad_keywords_raise_value_error(kwargs, match):
    data = save(Image.new("RGB", (2, 2)), "PNG")
    with pytest.raises(ValueError, match=match) as info:
        decode_image(data, **kwargs)
    assert not isinstance(info.value, ImageRejected)


# --------------------------------------------------------------------------------------------------
# resize_to_width


def lanczos3(x: np.ndarray) -> np.ndarray:
    """Lanczos kernel, a = 3: sinc(x) sinc(x / 3) for |x| < 3 (Duchon 1979; Turkowski 1990)."""
    return np.where(np.abs(x) < 3, np.sinc(x) * np.sinc(x / 3), 0.0)


def lanczos_matrix(n_in: int, n_out: int) -> np.ndarray:
    """Downscaling weights with pixel centres at (i + 0.5) and the kernel stretched by the scale."""
    scale = n_in / n_out
    centres = (np.arange(n_out) + 0.5) * scale
    src = np.arange(n_in) + 0.5
    w = lanczos3((src[None, :] - centres[:, None]) / scale)
    return w / w.sum(axis=1, keepdims=True)


def test_resize_matches_a_lanczos3_reference():
    img = RNG.integers(0, 256, (45, 64, 3), dtype=np.uint8)
    out = resize_to_width(img, 20)
    assert out.shape == (14, 20, 3) and out.dtype == np.uint8  # 45 * 20 / 64 = 14.06
    # Separable: horizontal pass rounded to 8 bits, then vertical (what an 8-bit resampler stores).
    horiz = np.clip(np.rint(np.einsum("ow,hwc->hoc", lanczos_matrix(64, 20), img)), 0, 255)
    ref = np.clip(np.rint(np.einsum("oh,hwc->owc", lanczos_matrix(45, 14), horiz)), 0, 255)
    assert np.max(np.abs(out.astype(int) - ref)) <= 1


def test_resize_keeps_aspect_ratio_and_grayscale():
    gray = RNG.integers(0, 256, (300, 400), dtype=np.uint8)
    out = resize_to_width(gray, 150)
    assert out.shape == (112, 150)  # 300 * 150 / 400 = 112.5, rounded half to even
    assert resize_to_width(np.zeros((1, 1000, 3), np.uint8), 10).shape == (1, 10, 3)  # height >= 1


def test_resize_of_a_flat_image_stays_flat():
    flat = np.full((50, 80, 3), (12, 140, 250), dtype=np.uint8)
    np.testing.assert_array_equal(resize_to_width(flat, 33), np.full((21, 33, 3), (12, 140, 250)))


def test_resize_never_upscales_and_none_is_as_is():
    img = RNG.integers(0, 256, (10, 20, 3), dtype=np.uint8)
    assert resize_to_width(img, None) is img
    assert resize_to_width(img, 20) is img
    assert resize_to_width(img, 4000) is img


@pytest.mark.parametrize("width", [0, -5, 2.5, True, "100"])
def test_resize_rejects_bad_width(width):
    with pytest.raises(ValueError, match="width must be a positive integer or None"):
        resize_to_width(np.zeros((4, 4, 3), np.uint8), width)


def test_resize_rejects_bad_pixels():
    with pytest.raises(ValueError, match="dtype uint8"):
        resize_to_width(np.zeros((4, 4, 3), np.float32), 2)
    with pytest.raises(ValueError, match=r"shape \(H, W\) or \(H, W, 3\)"):
        resize_to_width(np.zeros((4, 4, 4), np.uint8), 2)


# --------------------------------------------------------------------------------------------------
# encode_jpeg / encode_png


@pytest.mark.parametrize(
    "quality, cutoff, subsampling, factors",
    [
        # Luma (H, V) per T.81 A.1.1 for each scheme; chroma components are 1x1.
        (75, 64, "4:2:0", (2, 2)),
        (30, 20, "4:2:2", (2, 1)),
        (95, 6, "4:4:4", (1, 1)),
        (1, 64, "4:2:0", (2, 2)),
        (100, 1, "4:4:4", (1, 1)),
    ],
)
def test_encode_jpeg_uses_the_engine_tables(quality, cutoff, subsampling, factors):
    luma, chroma = quant_tables(quality, cutoff)
    data = encode_jpeg(smooth_rgb(40, 56), quality=quality, cutoff=cutoff, subsampling=subsampling)
    # Read back with Pillow...
    im = Image.open(io.BytesIO(data))
    assert im.format == "JPEG" and im.mode == "RGB" and im.size == (56, 40)
    np.testing.assert_array_equal(np.array(im.quantization[0]).reshape(8, 8), luma)
    np.testing.assert_array_equal(np.array(im.quantization[1]).reshape(8, 8), chroma)
    assert JpegImagePlugin.get_sampling(im) == {"4:4:4": 0, "4:2:2": 1, "4:2:0": 2}[subsampling]
    # ...and by parsing the markers per ITU-T T.81 Annex B, which is independent of Pillow.
    tables = dqt_tables(data)
    np.testing.assert_array_equal(tables[0], luma)
    np.testing.assert_array_equal(tables[1], chroma)
    sof, comps = frame_header(data)
    assert sof == 0xC0  # baseline DCT
    assert [(h, v, tq) for _, h, v, tq in comps] == [(*factors, 0), (1, 1, 1), (1, 1, 1)]
    markers = [m for m, _ in jpeg_segments(data)]
    assert 0xE1 not in markers and 0xE2 not in markers  # no EXIF (APP1), no ICC (APP2)


def test_encode_jpeg_grayscale_has_one_component_and_only_the_luma_table():
    luma, _ = quant_tables(60, 30)
    gray = smooth_rgb(24, 24)[..., 0]
    data = encode_jpeg(gray, quality=60, cutoff=30, subsampling="4:2:0")
    im = Image.open(io.BytesIO(data))
    assert im.mode == "L" and len(im.quantization) == 1
    np.testing.assert_array_equal(np.array(im.quantization[0]).reshape(8, 8), luma)
    assert list(dqt_tables(data)) == [0]
    assert [(h, v, tq) for _, h, v, tq in frame_header(data)[1]] == [(1, 1, 0)]


def test_encode_jpeg_round_trip_is_close_at_high_quality():
    img = smooth_rgb(48, 64)
    back = decode_image(encode_jpeg(img, quality=95, subsampling="4:4:4")).pixels
    # A smooth image at quality 95 decodes within a few levels (PSNR well above 40 dB).
    mse = np.mean((back.astype(float) - img) ** 2)
    assert 10 * np.log10(255**2 / mse) > 40


def test_encode_jpeg_optimize_only_changes_the_huffman_tables():
    img = RNG.integers(0, 256, (64, 64, 3), dtype=np.uint8)
    a = encode_jpeg(img, quality=50, optimize=True)
    b = encode_jpeg(img, quality=50, optimize=False)
    assert len(a) < len(b)  # optimized Huffman codes are never longer (T.81 K.2)
    np.testing.assert_array_equal(decode_image(a).pixels, decode_image(b).pixels)


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"quality": 0}, r"quality must be an integer in 1\.\.100, got 0"),
        ({"quality": 50, "cutoff": 65}, r"cutoff must be an integer zigzag position in 1\.\.64, got 65"),
        ({"quality": 50, "subsampling": "4:1:1"}, r"subsampling must be one of .* got '4:1:1'"),
    ],
)
def test_encode_jpeg_rejects_bad_settings(kwargs, match):
    with pytest.raises(ValueError, match=match):
        encode_jpeg(np.zeros((8, 8, 3), np.uint8), **kwargs)


def test_encode_png_is_lossless_and_carries_no_metadata():
    for img in (RNG.integers(0, 256, (9, 11, 3), dtype=np.uint8), RNG.integers(0, 256, (9, 11), dtype=np.uint8)):
        data = encode_png(img)
        assert set(png_chunk_types(data)) == {b"IHDR", b"IDAT", b"IEND"}
        np.testing.assert_array_equal(np.array(Image.open(io.BytesIO(data))), img)
