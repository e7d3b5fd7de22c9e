"""Entropy-coded size of a baseline sequential JPEG file (ITU-T T.81 Annexes F and K).

The size comes from the scan's events (symbols and their magnitude bits):

* DC: each block's difference from the previous block of the same component (in coding order) is coded
  as its magnitude category SSSS (F.1.2.1, Table F.1) followed by SSSS extra bits.
* AC: zigzag coefficients 1..63 are coded as run/size symbols RRRRSSSS plus SSSS bits; a run of more
  than 15 zeros emits ZRL (0xF0) per 16 zeros, and a block whose last coefficient is zero ends with
  EOB (0x00) (F.1.2.2).
* Huffman code lengths are either the standard tables of Annex K.3 or optimal ones built as in Annex
  K.2 (with the reserved all-ones code point) and limited to 16 bits by the procedure of Figure K.3.
* The file adds 0xFF byte stuffing in the entropy-coded segment (F.1.2.3), padding of the last byte,
  and the marker segments that libjpeg writes: SOI, APP0 (JFIF), one DQT per table, SOF0, one DHT per
  table, SOS and EOI. Stuffing is counted exactly: the scan's bits are assembled from the canonical
  codes (Annex C) and the magnitude bits, and every 0xFF byte counted; so the size is byte for byte
  the file's (tests/test_exact.py).

The two passes over blocks and symbols (the events in coding order, and the bit assembly that counts
stuffing) are compiled loops (``dct.jit``); the Huffman construction over at most 257 symbols runs
in Python.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .jit import bit_length, kernel, popcount, trailing_zeros

# ITU-T T.81 Annex K.3, Table K.3 (luminance DC), as BITS (codes of length 1..16) and HUFFVAL.
STD_DC_LUMA_BITS = (0, 1, 5, 1, 1, 1, 1, 1, 1, 0, 0, 0, 0, 0, 0, 0)
STD_DC_LUMA_VALS = tuple(range(12))
# Table K.4 (chrominance DC).
STD_DC_CHROMA_BITS = (0, 3, 1, 1, 1, 1, 1, 1, 1, 1, 1, 0, 0, 0, 0, 0)
STD_DC_CHROMA_VALS = tuple(range(12))
# Table K.5 (luminance AC).
STD_AC_LUMA_BITS = (0, 2, 1, 3, 3, 2, 4, 3, 5, 5, 4, 4, 0, 0, 1, 0x7D)
STD_AC_LUMA_VALS = (
    0x01, 0x02, 0x03, 0x00, 0x04, 0x11, 0x05, 0x12, 0x21, 0x31, 0x41, 0x06, 0x13, 0x51, 0x61, 0x07,
    0x22, 0x71, 0x14, 0x32, 0x81, 0x91, 0xA1, 0x08, 0x23, 0x42, 0xB1, 0xC1, 0x15, 0x52, 0xD1, 0xF0,
    0x24, 0x33, 0x62, 0x72, 0x82, 0x09, 0x0A, 0x16, 0x17, 0x18, 0x19, 0x1A, 0x25, 0x26, 0x27, 0x28,
    0x29, 0x2A, 0x34, 0x35, 0x36, 0x37, 0x38, 0x39, 0x3A, 0x43, 0x44, 0x45, 0x46, 0x47, 0x48, 0x49,
    0x4A, 0x53, 0x54, 0x55, 0x56, 0x57, 0x58, 0x59, 0x5A, 0x63, 0x64, 0x65, 0x66, 0x67, 0x68, 0x69,
    0x6A, 0x73, 0x74, 0x75, 0x76, 0x77, 0x78, 0x79, 0x7A, 0x83, 0x84, 0x85, 0x86, 0x87, 0x88, 0x89,
    0x8A, 0x92, 0x93, 0x94, 0x95, 0x96, 0x97, 0x98, 0x99, 0x9A, 0xA2, 0xA3, 0xA4, 0xA5, 0xA6, 0xA7,
    0xA8, 0xA9, 0xAA, 0xB2, 0xB3, 0xB4, 0xB5, 0xB6, 0xB7, 0xB8, 0xB9, 0xBA, 0xC2, 0xC3, 0xC4, 0xC5,
    0xC6, 0xC7, 0xC8, 0xC9, 0xCA, 0xD2, 0xD3, 0xD4, 0xD5, 0xD6, 0xD7, 0xD8, 0xD9, 0xDA, 0xE1, 0xE2,
    0xE3, 0xE4, 0xE5, 0xE6, 0xE7, 0xE8, 0xE9, 0xEA, 0xF1, 0xF2, 0xF3, 0xF4, 0xF5, 0xF6, 0xF7, 0xF8,
    0xF9, 0xFA,
)  # fmt: skip
# Table K.6 (chrominance AC).
STD_AC_CHROMA_BITS = (0, 2, 1, 2, 4, 4, 3, 4, 7, 5, 4, 4, 0, 1, 2, 0x77)
STD_AC_CHROMA_VALS = (
    0x00, 0x01, 0x02, 0x03, 0x11, 0x04, 0x05, 0x21, 0x31, 0x06, 0x12, 0x41, 0x51, 0x07, 0x61, 0x71,
    0x13, 0x22, 0x32, 0x81, 0x08, 0x14, 0x42, 0x91, 0xA1, 0xB1, 0xC1, 0x09, 0x23, 0x33, 0x52, 0xF0,
    0x15, 0x62, 0x72, 0xD1, 0x0A, 0x16, 0x24, 0x34, 0xE1, 0x25, 0xF1, 0x17, 0x18, 0x19, 0x1A, 0x26,
    0x27, 0x28, 0x29, 0x2A, 0x35, 0x36, 0x37, 0x38, 0x39, 0x3A, 0x43, 0x44, 0x45, 0x46, 0x47, 0x48,
    0x49, 0x4A, 0x53, 0x54, 0x55, 0x56, 0x57, 0x58, 0x59, 0x5A, 0x63, 0x64, 0x65, 0x66, 0x67, 0x68,
    0x69, 0x6A, 0x73, 0x74, 0x75, 0x76, 0x77, 0x78, 0x79, 0x7A, 0x82, 0x83, 0x84, 0x85, 0x86, 0x87,
    0x88, 0x89, 0x8A, 0x92, 0x93, 0x94, 0x95, 0x96, 0x97, 0x98, 0x99, 0x9A, 0xA2, 0xA3, 0xA4, 0xA5,
    0xA6, 0xA7, 0xA8, 0xA9, 0xAA, 0xB2, 0xB3, 0xB4, 0xB5, 0xB6, 0xB7, 0xB8, 0xB9, 0xBA, 0xC2, 0xC3,
    0xC4, 0xC5, 0xC6, 0xC7, 0xC8, 0xC9, 0xCA, 0xD2, 0xD3, 0xD4, 0xD5, 0xD6, 0xD7, 0xD8, 0xD9, 0xDA,
    0xE2, 0xE3, 0xE4, 0xE5, 0xE6, 0xE7, 0xE8, 0xE9, 0xEA, 0xF2, 0xF3, 0xF4, 0xF5, 0xF6, 0xF7, 0xF8,
    0xF9, 0xFA,
)  # fmt: skip

ZRL = 0xF0
EOB = 0x00
MAX_CODE_LENGTH = 16

# Marker segment sizes in bytes, each including its 2-byte marker (T.81 Annex B; JFIF APP0 from T.871).
SOI_BYTES = 2
EOI_BYTES = 2
APP0_JFIF_BYTES = 18
DQT_BYTES = 2 + 2 + 1 + 64  # one 8-bit table per segment, as libjpeg writes them


def sof0_bytes(components: int) -> int:
    return 2 + 8 + 3 * components


def sos_bytes(components: int) -> int:
    return 2 + 6 + 2 * components


def dht_bytes(symbol_count: int) -> int:
    return 2 + 2 + 1 + 16 + symbol_count


@dataclass
class SymbolStats:
    """Symbol counts of one Huffman table, plus the magnitude bits that follow the codes.

    dc : ndarray, shape (16,), int64 — counts of DC categories 0..15.
    ac : ndarray, shape (256,), int64 — counts of AC run/size symbols.
    extra_bits : int — total magnitude bits (DC and AC).
    """

    dc: np.ndarray
    ac: np.ndarray
    extra_bits: int

    def __add__(self, other: "SymbolStats") -> "SymbolStats":
        return SymbolStats(self.dc + other.dc, self.ac + other.ac, self.extra_bits + other.extra_bits)


@dataclass
class Scan:
    """Every symbol of one baseline scan, in the order the encoder writes them (no bits yet).

    Each event is one Huffman symbol followed by its magnitude bits:

    event : ndarray, shape (E,), uint16 — ``256 * table + symbol``: the table is ``2 * group + (0 for
        DC, 1 for AC)`` (group 0 is luma, 1 chroma), the symbol a DC category SSSS or an AC run/size
        RRRRSSSS (ZRL 0xF0, EOB 0x00). SSSS magnitude bits follow it.
    extra : ndarray, shape (E,), int32 — the magnitude bits' value (T.81 F.1.2.1: v, or v - 1 masked,
        for negative v).
    groups : int — how many Huffman table pairs the scan uses.
    histogram : ndarray, shape (2 * groups, 256), int64 — the events counted per table and symbol.
    """

    event: np.ndarray
    extra: np.ndarray
    groups: int
    histogram: np.ndarray

    @property
    def extra_bits(self) -> np.ndarray:
        """Magnitude bits per table pair, shape (groups,): they follow from the counts (SSSS is a DC
        symbol itself, an AC symbol's low nibble)."""
        return self.histogram[0::2] @ _DC_SIZE + self.histogram[1::2] @ _AC_SIZE

    def counts(self, table: int) -> np.ndarray:
        """Symbol counts of one table: shape (16,) for DC tables, (256,) for AC tables."""
        return self.histogram[table, : 16 if table % 2 == 0 else 256].copy()

    def stats(self, group: int) -> SymbolStats:
        return SymbolStats(self.counts(2 * group), self.counts(2 * group + 1), int(self.extra_bits[group]))


def scan_symbols(blocks: np.ndarray, component: np.ndarray, group_of_component: tuple[int, ...]) -> Scan:
    """The symbol sequence of a scan, vectorized over all blocks (T.81 F.1.2.1 and F.1.2.2).

    Parameters
    ----------
    blocks : ndarray, shape (N, 64), integer
        Quantized coefficients in zigzag order, blocks in the scan's coding order (for an interleaved
        scan: MCU by MCU, each MCU's blocks component by component).
    component : ndarray, shape (N,), integer
        The component of each block; DC prediction runs along each component's own blocks, starting
        from 0.
    group_of_component : tuple of int
        The Huffman table pair of each component (libjpeg: 0 for Y, 1 for Cb and Cr).
    """
    blocks = np.ascontiguousarray(blocks)
    component = np.asarray(component)
    n = blocks.shape[0]
    # In chunks of blocks, so the temporaries stay bounded on large images.
    return scan_chunks(((blocks[lo : lo + _SCAN_CHUNK], component[lo : lo + _SCAN_CHUNK])
                        for lo in range(0, max(n, 1), _SCAN_CHUNK)), group_of_component)


def scan_chunks(chunks, group_of_component: tuple[int, ...]) -> Scan:
    """:func:`scan_symbols` of a scan given as consecutive pieces ``(blocks, component)`` in coding
    order: events stay in order and each component's DC prediction carries over between pieces, so
    the whole scan's blocks never need to exist at once."""
    parts, previous = [], np.zeros(len(group_of_component), np.int64)
    for chunk, comp in chunks:
        parts.append(_scan_part(np.ascontiguousarray(chunk), comp, group_of_component, previous))
    if len(parts) == 1:
        return parts[0]
    return Scan(np.concatenate([p.event for p in parts]), np.concatenate([p.extra for p in parts]), parts[0].groups,
                sum(p.histogram for p in parts))


_SCAN_CHUNK = 1 << 15


def _scan_part(blocks: np.ndarray, component: np.ndarray, group_of_component: tuple[int, ...],
               previous_dc: np.ndarray) -> Scan:
    """:func:`scan_symbols` of consecutive blocks, each component's DC predicted from ``previous_dc``
    (which is left holding each component's last DC, for the next piece)."""
    blocks = _coefficients(blocks)
    component = np.ascontiguousarray(component, dtype=np.int8)
    group = np.asarray(group_of_component, dtype=np.int8)
    groups = len(set(group_of_component))
    # Room for every event: a DC per block, one per AC non-zero, at most 3 ZRLs and an EOB per block.
    room = np.count_nonzero(blocks) + 5 * blocks.shape[0]
    event = np.empty(room, np.uint16)
    extra = np.empty(room, np.int32)
    n = _fill_events(blocks, _nonzero_masks(blocks)[0], component, group, previous_dc, event, extra)
    return _finished_scan(n, event, extra, groups)


def _finished_scan(n: int, event: np.ndarray, extra: np.ndarray, groups: int) -> Scan:
    """The scan of the first ``n`` events written, counted per table and symbol."""
    if n < 0:
        raise ValueError("a DC difference is beyond baseline JPEG's range (16-bit categories)")
    histogram = np.zeros((2 * groups, 256), np.int64)
    _count_events(event[:n], histogram.reshape(-1))
    return Scan(event[:n], extra[:n], groups, histogram)


def _coefficients(blocks) -> np.ndarray:
    """Quantized blocks as contiguous int16 (libjpeg's JCOEF), refusing values that do not fit."""
    blocks = np.asarray(blocks)
    if blocks.dtype != np.int16 and blocks.size and np.abs(blocks).max() > np.iinfo(np.int16).max:
        raise ValueError(f"coefficient magnitude {int(np.abs(blocks).max())} is beyond baseline JPEG's range")
    return np.ascontiguousarray(blocks, dtype=np.int16)


_DC_SIZE = np.where(np.arange(256) <= 16, np.arange(256), 0).astype(np.int64)
_AC_SIZE = (np.arange(256) & 15).astype(np.int64)


def scan_interleaved(luma: np.ndarray, cb: np.ndarray, cr: np.ndarray, h: int, v: int) -> Scan:
    """The symbol sequence of a colour image's single interleaved scan (T.81 A.2.3), read straight
    from each component's blocks.

    Parameters
    ----------
    luma : ndarray, shape (nby, nbx, 64), int16 — the luma component's real blocks, zigzag order.
    cb, cr : ndarray, shape (mcu_rows, mcu_cols, 64), int16 — one chroma block per MCU.
    h, v : int — luma's sampling factors: its blocks per MCU across and down (Y table pair 0,
        Cb and Cr pair 1).

    Each MCU is its h x v luma blocks in raster order, then Cb, then Cr. Where the image does not fill
    the last MCU column or row, libjpeg codes dummy luma blocks whose AC is zero and whose DC
    repeats a neighbour: the last real block of the row for a block past the right edge, and for one
    below the bottom the last real row's block at the MCU's right-hand column (or the row's last
    real block, where that column is past the edge too).
    """
    arrays = [_coefficients(a) for a in (luma, cb, cr)]
    mcus = arrays[1].shape[0] * arrays[1].shape[1]
    if arrays[2].shape != arrays[1].shape or (arrays[1].shape[0] * v < arrays[0].shape[0]
                                              or arrays[1].shape[1] * h < arrays[0].shape[1]):
        raise ValueError(f"blocks of shapes {[a.shape for a in arrays]} are not one {h}x{v} MCU grid")
    masks, nonzero = zip(*(_nonzero_masks(a) for a in arrays))
    # Room for every event: per block a DC, its AC non-zeros, at most 3 ZRLs and an EOB.
    room = sum(nonzero) + 5 * mcus * (h * v + 2)
    event = np.empty(room, np.uint16)
    extra = np.empty(room, np.int32)
    n = _fill_interleaved_events(arrays[0], arrays[1], arrays[2], *masks, h, v, event, extra)
    return _finished_scan(n, event, extra, 2)


@kernel(inline=True)
def _category(magnitude):
    """SSSS (T.81 Tables F.1 and F.2): the bit length of a non-negative magnitude."""
    return bit_length(magnitude)


@kernel
def _nonzero_masks(blocks):
    """Per block of (..., 64) (shaped as the blocks are), a 64-bit word whose bit k is set where AC
    coefficient k is non-zero, and how many AC coefficients are non-zero in all: a pass of its own,
    which the compiler vectorizes (inside the event loop it would not)."""
    flat = blocks.reshape(-1, 64)
    masks = np.zeros(flat.shape[0], np.uint64)
    count = 0
    for b in range(flat.shape[0]):
        block = flat[b]
        m = np.uint64(0)
        for k in range(1, 64):
            m |= np.uint64(block[k] != 0) << np.uint64(k)
        masks[b] = m
        count += popcount(m)
    return masks.reshape(blocks.shape[:-1]), count


@kernel(inline=True)
def _block_events(block, m, c, dc_table, previous_dc, event, extra, e):
    """Append one block's events (T.81 F.1.2.1 and F.1.2.2) from position ``e``; the new count, or
    -1 if its DC difference needs more than 16 bits. (They are counted afterwards, by
    :func:`_count_events`.) ``m``, the mask of its AC non-zeros (:func:`_nonzero_masks`), leads
    straight from one to the next."""
    dc = np.int64(block[0])
    diff = dc - previous_dc[c]
    previous_dc[c] = dc
    size = _category(abs(diff))
    if size > 16:
        return -1
    event[e] = (dc_table << 8) | size
    extra[e] = diff if diff >= 0 else diff + (1 << size) - 1  # negative: v - 1 in SSSS bits
    e += 1
    last = 0
    ac_event = (dc_table + 1) << 8
    while m:
        k = np.int64(trailing_zeros(m))  # the next non-zero's position
        m &= m - np.uint64(1)  # and its bit cleared
        v = np.int64(block[k])
        run = k - last - 1
        while run > 15:  # ZRL: sixteen zeros
            event[e], extra[e] = ac_event | ZRL, 0
            e += 1
            run -= 16
        size = _category(abs(v))
        symbol = (run << 4) | size
        event[e] = ac_event | symbol
        extra[e] = v if v >= 0 else v + (1 << size) - 1
        e += 1
        last = k
    if last != 63:
        event[e], extra[e] = ac_event | EOB, 0
        e += 1
    return e


@kernel
def _count_events(event, counts):
    """Add each event to ``counts`` (flat: 256 * table + symbol), in four interleaved partial
    histograms so that repeated symbols do not wait on each other's increments."""
    part = np.zeros((4, counts.size), np.int64)
    n = event.size - event.size % 4
    for i in range(0, n, 4):
        part[0, event[i]] += 1
        part[1, event[i + 1]] += 1
        part[2, event[i + 2]] += 1
        part[3, event[i + 3]] += 1
    for i in range(n, event.size):
        part[0, event[i]] += 1
    for k in range(counts.size):
        counts[k] += part[0, k] + part[1, k] + part[2, k] + part[3, k]


@kernel
def _fill_events(blocks, masks, component, group, previous_dc, event, extra):
    """The events of blocks given in coding order with their components; their number, or -1."""
    e = 0
    for b in range(blocks.shape[0]):
        c = component[b]
        e = _block_events(blocks[b], masks[b], c, 2 * group[c], previous_dc, event, extra, e)
        if e < 0:
            return -1
    return e


@kernel
def _fill_interleaved_events(luma, cb, cr, luma_masks, cb_masks, cr_masks, h, v, event, extra):
    """The events of an interleaved scan, MCU by MCU (see :func:`scan_interleaved`)."""
    nby, nbx = luma.shape[0], luma.shape[1]
    previous_dc = np.zeros(3, np.int64)
    dummy = np.zeros(64, luma.dtype)
    e = 0
    for my in range(cb.shape[0]):
        for mx in range(cb.shape[1]):
            for dy in range(v):
                for dx in range(h):
                    by, bx = my * v + dy, mx * h + dx
                    if by < nby and bx < nbx:
                        e = _block_events(luma[by, bx], luma_masks[by, bx], 0, 0, previous_dc, event, extra, e)
                    else:  # a dummy block: no AC, the DC of a neighbour
                        dummy[0] = luma[by, nbx - 1, 0] if by < nby else luma[nby - 1, min(mx * h + h - 1, nbx - 1), 0]
                        e = _block_events(dummy, np.uint64(0), 0, 0, previous_dc, event, extra, e)
                    if e < 0:
                        return -1
            e = _block_events(cb[my, mx], cb_masks[my, mx], 1, 2, previous_dc, event, extra, e)
            if e < 0:
                return -1
            e = _block_events(cr[my, mx], cr_masks[my, mx], 2, 2, previous_dc, event, extra, e)
            if e < 0:
                return -1
    return e


def block_symbol_stats(blocks: np.ndarray) -> SymbolStats:
    """Symbol counts of one component's blocks (N, 64), zigzag order, in coding order."""
    blocks = np.asarray(blocks)
    return scan_symbols(blocks, np.zeros(blocks.shape[0], np.int64), (0,)).stats(0)


def canonical_codes(bits: tuple[int, ...], huffval: tuple[int, ...], size: int) -> tuple[np.ndarray, np.ndarray]:
    """Code words and lengths of a table given as BITS and HUFFVAL (T.81 Annex C, Figures C.1-C.3).

    Returns
    -------
    codes, lengths : ndarray, shape (size,), int64 — 0 length for symbols without a code.
    """
    codes = np.zeros(size, dtype=np.int64)
    lengths = np.zeros(size, dtype=np.int64)
    code, k = 0, 0
    for length, count in enumerate(bits, start=1):
        for _ in range(count):
            codes[huffval[k]] = code
            lengths[huffval[k]] = length
            code += 1
            k += 1
        code <<= 1
    return codes, lengths


def entropy_coded_bytes(scan: Scan, tables: list[tuple[np.ndarray, np.ndarray]]) -> tuple[int, int]:
    """Exact length of the entropy-coded segment: the packed bits, padding and 0xFF stuffing.

    The bits are assembled as the encoder writes them (T.81 F.1.2.3): each symbol's code followed by
    its magnitude bits, most significant bit first, the last byte padded with 1-bits, and a 0x00
    stuffed after every 0xFF byte.

    Parameters
    ----------
    scan : Scan
    tables : list of (codes, lengths)
        One per table index of the scan (``2 * group + ac``), from :func:`canonical_codes`.

    Returns
    -------
    (bytes, stuffed) : total bytes of the segment including stuffing, and the stuffed count.
    """
    codes = np.zeros((len(tables), 256), dtype=np.int64)
    lens = np.zeros((len(tables), 256), dtype=np.int64)
    for t, (c, l) in enumerate(tables):
        codes[t, : c.size], lens[t, : l.size] = c, l
    missing = (scan.histogram > 0) & (lens[: scan.histogram.shape[0]] == 0)
    if np.any(missing):
        raise ValueError(f"symbols {sorted({int(i) % 256 for i in np.flatnonzero(missing)})!r} have no code in the table")
    # Magnitude bits after each symbol: a DC symbol is their count, an AC run/size has it low.
    symbol = np.arange(256)
    magnitude = np.array([symbol if t % 2 == 0 else symbol & 15 for t in range(len(tables))])
    magnitude[::2, 17:] = 0  # DC categories stop at 16
    n_bytes, stuffed = _assemble(scan.event, scan.extra, (lens + magnitude).ravel(), (codes << magnitude).ravel())
    return n_bytes + stuffed, stuffed


@kernel
def _assemble(event, extra, field_bits, field_code):
    """Write the scan's bits most significant first into a 64-bit accumulator and take them out 32 at
    a time; the byte count (the last one padded with 1-bits) and how many of them are 0xFF. Per event
    kind, ``field_bits`` is its code's length plus its magnitude bits (at most 32) and ``field_code``
    its code shifted past them; the event's own magnitude bits fill the gap. Fewer than 32 bits are
    pending after each event, so the accumulator never loses one that is still to be taken out (older
    bits shift out past its top)."""
    acc = np.int64(0)
    pending = np.int64(0)
    words = 0
    stuffed = 0
    for i in range(event.shape[0]):
        k = event[i]
        acc = (acc << field_bits[k]) | field_code[k] | extra[i]
        pending += field_bits[k]
        if pending >= 32:
            pending -= 32
            stuffed += _ff_bytes((acc >> pending) & 0xFFFFFFFF)
            words += 1
    n_bytes = 4 * words
    while pending >= 8:
        pending -= 8
        if (acc >> pending) & 0xFF == 0xFF:
            stuffed += 1
        n_bytes += 1
    if pending:
        n_bytes += 1
        if ((acc << (8 - pending)) | ((1 << (8 - pending)) - 1)) & 0xFF == 0xFF:
            stuffed += 1
    return n_bytes, stuffed


@kernel
def _ff_bytes(word):
    """How many of a 32-bit word's four bytes are 0xFF, without a branch: in x = ~word a byte is zero
    exactly when adding 0x7F to its low seven bits leaves its top bit clear and its own top bit is
    clear too; those top bits are then summed by one multiplication."""
    x = ~word & 0xFFFFFFFF
    zero_tops = ~(((x & 0x7F7F7F7F) + 0x7F7F7F7F) | x | 0x7F7F7F7F) & 0xFFFFFFFF
    return (((zero_tops >> 7) * 0x01010101) >> 24) & 0xFF


def optimal_table(counts: np.ndarray) -> tuple[tuple[int, ...], tuple[int, ...]]:
    """The Huffman table libjpeg builds for symbol counts (ITU-T T.81 Annex K.2), as BITS and HUFFVAL.

    As in K.2, a reserved pseudo-symbol with count 1 (index ``len(counts)``) keeps any real code from
    being all ones; code lengths are limited to 16 bits by the procedure of Figure K.3 (Adjust_BITS) and
    the pseudo-symbol's code is then removed from the longest length. Ties matter for the exact file:
    each merge takes the two least frequent nodes, and among equal counts the *higher* symbol index
    first, a merged node keeping the index of the first (libjpeg's ``jpeg_gen_optimal_table``, learnt
    from libjpeg-turbo's jchuff.c). HUFFVAL lists symbols by their unlimited code length, then index.

    Parameters
    ----------
    counts : ndarray, shape (S,), non-negative integers

    Returns
    -------
    bits : tuple of 16 ints — number of codes of length 1..16.
    huffval : tuple of ints — the symbols in code order.
    """
    counts = np.asarray(counts, dtype=np.int64)
    used = [int(s) for s in np.flatnonzero(counts)]
    if not used:
        return (0,) * MAX_CODE_LENGTH, ()
    symbols = used + [counts.size]  # the reserved pseudo-symbol comes last
    freqs = np.append(counts[used], 1)
    depth = _huffman_depths(freqs).tolist()

    max_len = max(max(depth), MAX_CODE_LENGTH)
    bits = [0] * (max_len + 1)
    for d in depth:
        bits[d] += 1
    # Figure K.3, Adjust_BITS: move pairs of over-long codes up the tree.
    i = max_len
    while i > MAX_CODE_LENGTH:
        while bits[i] > 0:
            j = i - 2
            while bits[j] == 0:
                j -= 1
            bits[i] -= 2
            bits[i - 1] += 1
            bits[j + 1] += 2
            bits[j] -= 1
        i -= 1
    # Remove the reserved code point from the longest length in use.
    i = MAX_CODE_LENGTH
    while bits[i] == 0:
        i -= 1
    bits[i] -= 1
    order = sorted(range(len(used)), key=lambda k: (depth[k], symbols[k]))
    return tuple(bits[1 : MAX_CODE_LENGTH + 1]), tuple(symbols[k] for k in order)


@kernel
def _huffman_depths(freqs):
    """Code length of each node of a plain Huffman tree built by repeated merging (T.81 K.2, Figure
    K.1). Each merge takes the least count, then the next least; among equal counts the higher
    index (libjpeg's choice of c1, then c2), and the merged node keeps the first one's index.
    A chain per node lists the leaves under it, so that a merge deepens them all."""
    m = freqs.size
    count = freqs.copy()
    alive = np.ones(m, np.bool_)
    depth = np.zeros(m, np.int64)
    chain = np.full(m, -1, np.int64)  # the next leaf under the same node
    last = np.arange(m)  # each node's last leaf
    for _ in range(m - 1):
        c1 = -1
        for i in range(m):  # scanning upward, "<=" keeps the highest index among equal counts
            if alive[i] and (c1 < 0 or count[i] <= count[c1]):
                c1 = i
        c2 = -1
        for i in range(m):
            if alive[i] and i != c1 and (c2 < 0 or count[i] <= count[c2]):
                c2 = i
        count[c1] += count[c2]
        alive[c2] = False
        for root in (c1, c2):
            leaf = root
            while leaf >= 0:
                depth[leaf] += 1
                leaf = chain[leaf]
        chain[last[c1]] = c2
        last[c1] = last[c2]
    return depth


def optimal_code_lengths(counts: np.ndarray) -> np.ndarray:
    """Per-symbol code lengths of :func:`optimal_table` (0 for symbols that never occur), int32."""
    counts = np.asarray(counts)
    bits, huffval = optimal_table(counts)
    return standard_code_lengths(bits, huffval, counts.size)


def standard_code_lengths(bits: tuple[int, ...], values: tuple[int, ...], size: int) -> np.ndarray:
    """Per-symbol code lengths of a table given as BITS and HUFFVAL (T.81 Annex C)."""
    lengths = np.zeros(size, dtype=np.int32)
    pos = 0
    for length, count in enumerate(bits, start=1):
        for _ in range(count):
            lengths[values[pos]] = length
            pos += 1
    return lengths


STD_LENGTHS = {
    "dc_luma": standard_code_lengths(STD_DC_LUMA_BITS, STD_DC_LUMA_VALS, 16),
    "ac_luma": standard_code_lengths(STD_AC_LUMA_BITS, STD_AC_LUMA_VALS, 256),
    "dc_chroma": standard_code_lengths(STD_DC_CHROMA_BITS, STD_DC_CHROMA_VALS, 16),
    "ac_chroma": standard_code_lengths(STD_AC_CHROMA_BITS, STD_AC_CHROMA_VALS, 256),
}


def coded_bits(counts: np.ndarray, lengths: np.ndarray) -> int:
    """Total Huffman code bits for symbol counts under given code lengths."""
    missing = (counts > 0) & (lengths == 0)
    if np.any(missing):
        raise ValueError(f"symbols {np.flatnonzero(missing).tolist()!r} have no code in the table")
    return int(np.dot(counts, lengths))


STD_TABLES = {
    (0, "dc"): (STD_DC_LUMA_BITS, STD_DC_LUMA_VALS),
    (0, "ac"): (STD_AC_LUMA_BITS, STD_AC_LUMA_VALS),
    (1, "dc"): (STD_DC_CHROMA_BITS, STD_DC_CHROMA_VALS),
    (1, "ac"): (STD_AC_CHROMA_BITS, STD_AC_CHROMA_VALS),
}


@dataclass
class FileSize:
    """Breakdown of a JPEG file's size, in bytes."""

    headers: int
    scan: int  # entropy-coded data including stuffing and padding
    total: int
    stuffed: int = 0


def file_size(scan: Scan, *, components: int, quant_tables: int, optimal: bool = True) -> FileSize:
    """The exact size of the baseline file libjpeg writes for a scan.

    Parameters
    ----------
    scan : Scan
        From :func:`scan_symbols`.
    components : int
        1 (grayscale) or 3.
    quant_tables : int
        Number of DQT tables written (1 or 2).
    optimal : bool
        Optimal per-image Huffman tables (``optimize=True``; :func:`optimal_table`) or the standard
        tables of Annex K.3.
    """
    headers = SOI_BYTES + APP0_JFIF_BYTES + quant_tables * DQT_BYTES + sof0_bytes(components)
    headers += sos_bytes(components) + EOI_BYTES
    tables = []
    for group in range(scan.groups):
        for kind, size in (("dc", 16), ("ac", 256)):
            if optimal:
                bits, huffval = optimal_table(scan.counts(len(tables)))
            else:
                bits, huffval = STD_TABLES[(group, kind)]
            headers += dht_bytes(len(huffval))
            tables.append(canonical_codes(bits, huffval, size))
    data, stuffed = entropy_coded_bytes(scan, tables)
    return FileSize(headers=headers, scan=data, total=headers + data, stuffed=stuffed)
