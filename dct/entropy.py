"""Entropy-coded size of a baseline sequential JPEG file (ITU-T T.81 Annexes F and K).

The size is computed from symbol statistics rather than by writing bits:

* DC: each block's difference from the previous block of the same component (in coding order) is coded
  as its magnitude category SSSS (F.1.2.1, Table F.1) followed by SSSS extra bits.
* AC: zigzag coefficients 1..63 are coded as run/size symbols RRRRSSSS plus SSSS bits; a run of more
  than 15 zeros emits ZRL (0xF0) per 16 zeros, and a block whose last coefficient is zero ends with
  EOB (0x00) (F.1.2.2).
* Huffman code lengths are either the standard tables of Annex K.3 or optimal ones built as in Annex
  K.2 (with the reserved all-ones code point) and limited to 16 bits by the procedure of Figure K.3.
* The file adds 0xFF byte stuffing in the entropy-coded segment (F.1.2.3), padding of the last byte,
  and the marker segments that libjpeg writes: SOI, APP0 (JFIF), one DQT per table, SOF0, one DHT per
  table, SOS and EOI.

Everything that touches coefficients is vectorized over all blocks (numpy), with no Python loop per
block or coefficient; only the Huffman construction over at most 256 symbols runs in Python.
"""

from __future__ import annotations

import heapq
from dataclasses import dataclass

import numpy as np

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


_CATEGORY = np.zeros(1 << 16, dtype=np.int32)
for _k in range(1, 17):
    _CATEGORY[1 << (_k - 1) : 1 << _k] = _k


def magnitude_category(values: np.ndarray) -> np.ndarray:
    """SSSS of T.81 Table F.1 / F.2: the bit length of ``|v|`` (0 for 0), as int32."""
    mags = np.abs(np.asarray(values, dtype=np.int64))
    if mags.size and mags.max() >= _CATEGORY.size:
        raise ValueError(f"coefficient magnitude {int(mags.max())} is beyond baseline JPEG's range")
    return _CATEGORY[mags]


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


def block_symbol_stats(blocks: np.ndarray) -> SymbolStats:
    """Count the symbols of one component's blocks.

    Parameters
    ----------
    blocks : ndarray, shape (N, 64), integer
        Quantized coefficients in zigzag order, blocks in coding order (DC prediction runs along it).
    """
    blocks = np.ascontiguousarray(blocks)
    n = blocks.shape[0]
    if n == 0:
        return SymbolStats(np.zeros(16, np.int64), np.zeros(256, np.int64), 0)

    # DC differences (F.1.2.1): the predictor starts at 0 for the first block of the scan.
    dc = blocks[:, 0].astype(np.int64)
    diff = np.diff(dc, prepend=0)
    dc_cat = magnitude_category(diff)
    dc_counts = np.bincount(dc_cat, minlength=16)[:16].astype(np.int64)
    extra = int(dc_cat.sum())

    # AC run/size symbols (F.1.2.2). Positions are 1..63 within each block; on the contiguous
    # (N, 64) array a flat index splits into block (>> 6) and position (& 63).
    flat = np.flatnonzero(blocks)
    flat = flat[(flat & 63) != 0]
    rows, pos = flat >> 6, flat & 63
    size = magnitude_category(blocks.ravel()[flat])
    extra += int(size.sum())
    # The previous non-zero position in the same block (0 = the DC slot) gives the run length.
    prev = np.empty_like(pos)
    if pos.size:
        prev[0] = 0
        prev[1:] = pos[:-1]
        new_block = np.ones(pos.size, dtype=bool)
        new_block[1:] = rows[1:] != rows[:-1]
        prev[new_block] = 0
    run = pos - prev - 1
    ac_counts = np.bincount(((run & 15) << 4) | size, minlength=256).astype(np.int64)
    ac_counts[ZRL] += int((run >> 4).sum())
    # EOB unless the block's last non-zero coefficient sits at zigzag position 63.
    ends_at_63 = int(np.count_nonzero(blocks[:, 63]))
    ac_counts[EOB] += n - ends_at_63
    return SymbolStats(dc_counts, ac_counts, extra)


def optimal_code_lengths(counts: np.ndarray) -> np.ndarray:
    """Huffman code lengths for symbol counts, limited to 16 bits (ITU-T T.81 Annex K.2).

    As in K.2, a reserved pseudo-symbol with count 1 is added so that no real code is all ones; the
    lengths are then limited to 16 bits with the procedure of Figure K.3 (Adjust_BITS), and the
    pseudo-symbol's code is removed from the longest length. Symbols keep their order by original code
    length when lengths are reassigned, as the Annex K procedure Sort_input does.

    Parameters
    ----------
    counts : ndarray, shape (S,), non-negative integers

    Returns
    -------
    lengths : ndarray, shape (S,), int32 — 0 for symbols that never occur.
    """
    counts = np.asarray(counts, dtype=np.int64)
    used = np.flatnonzero(counts)
    lengths = np.zeros(counts.size, dtype=np.int32)
    if used.size == 0:
        return lengths
    reserved = counts.size  # index of the pseudo-symbol
    symbols = list(used) + [reserved]
    freqs = [int(counts[s]) for s in used] + [1]

    # Plain Huffman tree by repeated merging of the two least frequent nodes (K.2, Figure K.1).
    heap = [(f, i, (i,)) for i, f in enumerate(freqs)]
    heapq.heapify(heap)
    depth = [0] * len(freqs)
    tie = len(freqs)
    while len(heap) > 1:
        f1, _, a = heapq.heappop(heap)
        f2, _, b = heapq.heappop(heap)
        for leaf in a + b:
            depth[leaf] += 1
        heapq.heappush(heap, (f1 + f2, tie, a + b))
        tie += 1
    if len(freqs) == 1:  # cannot happen with the pseudo-symbol, kept for clarity
        depth[0] = 1

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

    # Reassign lengths in order of the original code lengths (shortest first), the pseudo-symbol last.
    order = sorted(range(len(freqs)), key=lambda k: (depth[k], symbols[k]))
    order = [k for k in order if symbols[k] != reserved]
    pos = 0
    for length in range(1, MAX_CODE_LENGTH + 1):
        for _ in range(bits[length]):
            lengths[symbols[order[pos]]] = length
            pos += 1
    return lengths


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


# Share of 0xFF bytes in entropy-coded data, which each need a stuffed 0x00 (T.81 F.1.2.3). Measured
# on libjpeg output (see tests/test_entropy.py): close to the 1/256 of random bytes.
STUFFING_RATE = 1.0 / 256.0


@dataclass
class FileSize:
    """Breakdown of an estimated JPEG file size, in bytes."""

    headers: int
    scan: int  # entropy-coded data including stuffing and padding
    total: int


def file_size(
    tables: list[tuple[SymbolStats, bool]], *, components: int, quant_tables: int, optimal: bool = True
) -> FileSize:
    """Estimate the complete file size from per-Huffman-table symbol statistics.

    Parameters
    ----------
    tables : list of (SymbolStats, is_luma)
        One entry per Huffman table pair: the luma table, and (for colour) the chroma table shared by
        Cb and Cr, as libjpeg assigns them.
    components : int
        1 (grayscale) or 3.
    quant_tables : int
        Number of DQT tables written (1 or 2).
    optimal : bool
        Optimal per-image Huffman tables (``optimize=True``) or the standard Annex K tables.
    """
    headers = SOI_BYTES + APP0_JFIF_BYTES + quant_tables * DQT_BYTES + sof0_bytes(components)
    headers += sos_bytes(components) + EOI_BYTES
    bits = 0
    for stats, is_luma in tables:
        if optimal:
            dc_len = optimal_code_lengths(stats.dc)
            ac_len = optimal_code_lengths(stats.ac)
            headers += dht_bytes(int(np.count_nonzero(stats.dc))) + dht_bytes(int(np.count_nonzero(stats.ac)))
        else:
            kind = "luma" if is_luma else "chroma"
            dc_len, ac_len = STD_LENGTHS[f"dc_{kind}"], STD_LENGTHS[f"ac_{kind}"]
            headers += dht_bytes(int(np.count_nonzero(dc_len))) + dht_bytes(int(np.count_nonzero(ac_len)))
        bits += coded_bits(stats.dc, dc_len) + coded_bits(stats.ac, ac_len) + stats.extra_bits
    data = (bits + 7) // 8  # the last byte is padded with 1-bits
    scan = data + int(round(data * STUFFING_RATE))
    return FileSize(headers=headers, scan=scan, total=headers + scan)
