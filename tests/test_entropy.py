"""Symbol statistics and Huffman code lengths against ITU-T T.81 and libjpeg's output (via Pillow)."""

import heapq
import io

import numpy as np
import pytest
from PIL import Image
from skimage import data

import dct
from dct import entropy
from tests.jpeg_markers import huffman_tables, scan_bytes, segments


def test_hand_worked_block():
    # One block, zigzag order: DC 5, AC 3 at position 3, AC -1 at position 20, the rest zero.
    # T.81 F.1.2: DC diff 5 -> SSSS 3 (3 extra bits); AC: run 2 / size 2 -> 0x22 (2 bits); then a run of
    # 16 zeros (positions 4..19) -> ZRL, then run 0 / size 1 -> 0x01 (1 bit); then EOB.
    block = np.zeros((1, 64), int)
    block[0, 0], block[0, 3], block[0, 20] = 5, 3, -1
    s = entropy.block_symbol_stats(block)
    assert s.dc.tolist()[:4] == [0, 0, 0, 1]
    assert {int(k): int(v) for k, v in enumerate(s.ac) if v} == {0x22: 1, 0xF0: 1, 0x01: 1, 0x00: 1}
    assert s.extra_bits == 3 + 2 + 1


def test_dc_prediction_and_last_coefficient():
    # DC differences run along the blocks (predictor starts at 0); a non-zero at position 63 needs no EOB.
    blocks = np.zeros((3, 64), int)
    blocks[:, 0] = [4, 4, -3]  # diffs 4, 0, -7 -> categories 3, 0, 3
    blocks[2, 63] = 1  # run of 62 zeros: 3 ZRL + run 14 / size 1
    s = entropy.block_symbol_stats(blocks)
    assert s.dc[0] == 1 and s.dc[3] == 2
    assert s.ac[0x00] == 2 and s.ac[0xF0] == 3 and s.ac[0xE1] == 1


def test_magnitude_categories_table_f1():
    # T.81 Table F.1: category k holds magnitudes 2^(k-1) .. 2^k - 1.
    v = np.array([0, 1, -1, 2, 3, -4, 7, 8, 1023, -1024, 2047])
    assert [entropy._category(abs(int(x))) for x in v] == [0, 1, 1, 2, 2, 3, 3, 4, 10, 11, 11]
    edge = [4095, 4096, 8191, 32767, 65535]
    assert [entropy._category(m) for m in edge] == [12, 13, 13, 15, 16]
    # Every magnitude an 8-bit baseline scan can hold, against the table's rule 2^(k-1) <= m < 2^k.
    for k in range(1, 13):
        assert {int(entropy._category(m)) for m in range(2 ** (k - 1), 2**k)} == {k}


def test_standard_tables_equal_libjpeg_dht():
    # libjpeg (through Pillow, optimize=False) writes the Annex K.3 tables; compare BITS and HUFFVAL.
    buf = io.BytesIO()
    Image.fromarray(data.astronaut()).save(buf, "JPEG", quality=75, optimize=False)
    t = huffman_tables(buf.getvalue())
    assert t[(0, 0)] == (list(entropy.STD_DC_LUMA_BITS), list(entropy.STD_DC_LUMA_VALS))
    assert t[(1, 0)] == (list(entropy.STD_AC_LUMA_BITS), list(entropy.STD_AC_LUMA_VALS))
    assert t[(0, 1)] == (list(entropy.STD_DC_CHROMA_BITS), list(entropy.STD_DC_CHROMA_VALS))
    assert t[(1, 1)] == (list(entropy.STD_AC_CHROMA_BITS), list(entropy.STD_AC_CHROMA_VALS))


def test_header_layout_matches_libjpeg():
    # Segment sizes of libjpeg's baseline output: SOI, APP0 JFIF, DQT x2, SOF0, DHT x4, SOS (T.81 Annex B).
    buf = io.BytesIO()
    Image.fromarray(data.coffee()).save(buf, "JPEG", quality=80, optimize=True)
    segs = list(segments(buf.getvalue()))
    markers = [m for m, _ in segs]
    assert markers == [0xE0, 0xDB, 0xDB, 0xC0, 0xC4, 0xC4, 0xC4, 0xC4, 0xDA]
    sizes = {m: 2 + 2 + len(p) for m, p in segs}
    assert sizes[0xE0] == entropy.APP0_JFIF_BYTES
    assert sizes[0xDB] == entropy.DQT_BYTES
    assert sizes[0xC0] == entropy.sof0_bytes(3)
    assert sizes[0xDA] == entropy.sos_bytes(3)
    for m, p in segs:
        if m == 0xC4:
            assert 2 + 2 + len(p) == entropy.dht_bytes(sum(p[1:17]))


def test_stuffed_bytes_counted_exactly():
    # The 0xFF 0x00 pairs in libjpeg's scan (Pillow, optimize=True) vs the engine's bit-exact count.
    for img in (data.astronaut(), data.coffee(), data.chelsea()):
        prepared = dct.PreparedImage(img)
        for q in (40, 90):
            setting = dct.Setting(q, 64, "4:2:0")
            luma, chroma = setting.tables()
            buf = io.BytesIO()
            Image.fromarray(img).save(buf, "JPEG", qtables=[luma.ravel().tolist(), chroma.ravel().tolist()],
                                      subsampling=2, optimize=True)
            scan = scan_bytes(buf.getvalue())
            size = prepared.size_breakdown(setting)
            assert size.stuffed == scan.count(b"\xff\x00")
            assert size.scan == len(scan)


def test_optimal_tables_equal_libjpeg_dht():
    # The DHT segments libjpeg writes with optimize=True (BITS and HUFFVAL, tie-breaks included) vs
    # the tables the engine builds from its own symbol counts.
    for img, sub in ((data.astronaut(), "4:2:0"), (data.camera(), "4:2:0"), (data.coffee(), "4:4:4")):
        prepared = dct.PreparedImage(img)
        for q in (10, 50, 85):
            setting = dct.Setting(q, 64 if q != 50 else 20, sub)
            luma, chroma = setting.tables()
            buf = io.BytesIO()
            qt = [luma.ravel().tolist()] if img.ndim == 2 else [luma.ravel().tolist(), chroma.ravel().tolist()]
            Image.fromarray(img).save(buf, "JPEG", qtables=qt, subsampling={"4:4:4": 0, "4:2:0": 2}[sub], optimize=True)
            theirs = huffman_tables(buf.getvalue())
            ours = prepared.huffman_tables(setting)
            for t, (bits, vals) in enumerate(ours):
                assert theirs[(t % 2, t // 2)] == (list(bits), list(vals)), (q, t)


def test_tie_break_takes_the_higher_symbol_first():
    # Four symbols of equal count: the first merge joins the two highest indices (libjpeg's rule), so
    # with the reserved pseudo-symbol (count 1, merged first) symbols 0 and 1 keep the short codes.
    bits, huffval = entropy.optimal_table(np.array([5, 5, 5, 5]))
    lengths = entropy.standard_code_lengths(bits, huffval, 4)
    assert lengths.tolist() == [2, 2, 2, 3]


def reference_huffman_cost(counts):
    """Plain Huffman cost (sum of count * depth) by repeated merging, an independent oracle."""
    heap = [int(c) for c in counts if c > 0]
    heapq.heapify(heap)
    cost = 0
    while len(heap) > 1:
        a, b = heapq.heappop(heap), heapq.heappop(heap)
        cost += a + b
        heapq.heappush(heap, a + b)
    return cost


def test_optimal_lengths_are_optimal_with_reserved_code():
    rng = np.random.default_rng(7)
    counts = rng.integers(0, 5000, 256)
    counts[rng.random(256) < 0.3] = 0
    lengths = entropy.optimal_code_lengths(counts)
    assert (lengths[counts == 0] == 0).all() and (lengths[counts > 0] > 0).all()
    # Kraft sum stays below 1: the all-ones code point is reserved (T.81 K.2).
    kraft = sum(2.0 ** -int(l) for l in lengths if l)
    assert kraft <= 1 - 2.0**-16 + 1e-12
    # With the pseudo-symbol (count 1) the tree is a plain Huffman tree, hence optimal.
    with_reserved = np.append(counts, 1)
    expected = reference_huffman_cost(with_reserved)
    got = int(np.dot(counts, lengths))
    assert expected - int(lengths.max()) <= got <= expected


def test_lengths_limited_to_16_bits():
    # Fibonacci counts force a Huffman tree deeper than 16 levels; Figure K.3 must cap it.
    fib = [1, 1]
    while len(fib) < 30:
        fib.append(fib[-1] + fib[-2])
    lengths = entropy.optimal_code_lengths(np.array(fib))
    assert lengths.max() == 16
    assert sum(2.0 ** -int(l) for l in lengths) < 1.0


def test_missing_code_is_an_error():
    counts = np.zeros(16, int)
    counts[13] = 1
    with pytest.raises(ValueError, match=r"symbols \[13\] have no code"):
        entropy.coded_bits(counts, entropy.STD_LENGTHS["dc_luma"])


def _textbook_scan_bits(blocks, component, group_of_component, tables) -> str:
    """The scan's bits as a string of '0'/'1', written the textbook way (T.81 F.1.2.1-F.1.2.3):
    per block the DC difference's category code and its bits, then per AC non-zero a ZRL per 16
    zeros before it and the run/size code with its bits, then EOB unless coefficient 63 is non-zero."""
    def bits(value, size):  # negative values: v - 1 in size bits
        return format(value if value >= 0 else value + (1 << size) - 1, f"0{size}b") if size else ""

    def code(table, symbol):
        codes, lengths = tables[table]
        assert lengths[symbol] > 0
        return format(int(codes[symbol]), f"0{int(lengths[symbol])}b")

    out, previous = [], {}
    for block, c in zip(blocks.tolist(), component.tolist()):
        g = group_of_component[c]
        diff = block[0] - previous.get(c, 0)
        previous[c] = block[0]
        size = abs(diff).bit_length()
        out += [code(2 * g, size), bits(diff, size)]
        run = 0
        for k in range(1, 64):
            if block[k] == 0:
                run += 1
                continue
            while run > 15:
                out.append(code(2 * g + 1, 0xF0))
                run -= 16
            size = abs(block[k]).bit_length()
            out += [code(2 * g + 1, (run << 4) | size), bits(block[k], size)]
            run = 0
        if run:
            out.append(code(2 * g + 1, 0x00))
    return "".join(out)


def _random_scan_blocks(seed: int, n: int = 300):
    import numpy as np

    rng = np.random.default_rng(seed)
    blocks = np.zeros((n, 64), np.int32)
    blocks[:, :12] = rng.integers(-40, 41, size=(n, 12))
    blocks[:, 0] = rng.integers(-900, 900, size=n)
    blocks[::7, 40] = rng.integers(-3, 4, size=blocks[::7].shape[0])  # runs over 15 zeros: ZRLs
    blocks[::11, 63] = 1  # blocks that end without an EOB
    component = np.tile(np.array([0, 0, 1, 2], np.int8), n // 4)
    return blocks, component


def test_entropy_coded_bytes_equal_a_textbook_encoder():
    """The compiled scan (statistics, then the bit walk that counts stuffing) against a plain Python
    encoder written from T.81: the same bits, padded with 1-bits, cut into bytes, a 0x00 stuffed
    after each 0xFF."""
    all_blocks, all_components = _random_scan_blocks(9)
    groups = (0, 1, 1)
    # Scans of several lengths, so that the bits left over after the last whole 32-bit word of the
    # assembly take many values (0 to 31) and the padded last byte is checked each way.
    tails = set()
    for n in (1, 2, 3, 4, 5, 7, 11, 16, 29, 64, 131, 300):
        blocks, component = all_blocks[:n], all_components[:n]
        scan = entropy.scan_symbols(blocks, component, groups)
        tables = [entropy.canonical_codes(*entropy.optimal_table(scan.counts(t)), 16 if t % 2 == 0 else 256)
                  for t in range(4)]
        stream = _textbook_scan_bits(blocks, component, groups, tables)
        tails.add(len(stream) % 32)
        stream += "1" * (-len(stream) % 8)
        data = [int(stream[i : i + 8], 2) for i in range(0, len(stream), 8)]
        assert entropy.entropy_coded_bytes(scan, tables) == (len(data) + data.count(0xFF), data.count(0xFF)), n
    assert data.count(0xFF) > 0  # the case under test occurs
    assert len(tails) >= 8


def test_scan_in_pieces_equals_one_pass():
    """A scan given in pieces (bounded memory on large images; DC prediction carried across them)
    has the statistics and the coded length of the scan given whole."""
    import numpy as np

    blocks, component = _random_scan_blocks(4, 92)
    groups = (0, 1, 1)
    whole = entropy.scan_symbols(blocks, component, groups)
    cuts = [0, 1, 8, 9, 40, 92]
    parts = entropy.scan_chunks([(blocks[a:b], component[a:b]) for a, b in zip(cuts, cuts[1:])], groups)
    np.testing.assert_array_equal(parts.histogram, whole.histogram)
    np.testing.assert_array_equal(parts.extra_bits, whole.extra_bits)
    tables = [entropy.canonical_codes(*entropy.optimal_table(whole.counts(t)), 16 if t % 2 == 0 else 256)
              for t in range(4)]
    assert entropy.entropy_coded_bytes(parts, tables) == entropy.entropy_coded_bytes(whole, tables)


def test_interleaved_scan_equals_the_blocks_in_mcu_order():
    """The scan read straight from the components against the generic scan of the same blocks laid
    out MCU by MCU in plain Python, dummy blocks included (T.81 A.2.3; libjpeg's dummy DCs: the
    row's last real block past the right edge, the last real row's block at the MCU's right-hand
    column below the bottom), for every sampling layout and sizes that leave partial MCUs."""
    import numpy as np

    rng = np.random.default_rng(31)
    for (h, v), (nby, nbx) in [((1, 1), (3, 5)), ((2, 1), (3, 5)), ((2, 2), (5, 7)), ((2, 2), (4, 6)), ((2, 2), (1, 1))]:
        luma = np.zeros((nby, nbx, 64), np.int16)
        luma[..., :10] = rng.integers(-20, 21, (nby, nbx, 10))
        luma[..., 0] = rng.integers(-500, 500, (nby, nbx))
        rows, cols = -(-nby // v), -(-nbx // h)
        cb, cr = (rng.integers(-5, 6, (rows, cols, 64)).astype(np.int16) * (rng.random((rows, cols, 64)) < 0.2)
                  for _ in range(2))
        blocks, component = [], []
        for my in range(rows):
            for mx in range(cols):
                for dy in range(v):
                    for dx in range(h):
                        by, bx = my * v + dy, mx * h + dx
                        block = np.zeros(64, np.int16)
                        if by < nby and bx < nbx:
                            block = luma[by, bx]
                        elif by < nby:
                            block[0] = luma[by, nbx - 1, 0]
                        else:
                            block[0] = luma[nby - 1, min(mx * h + h - 1, nbx - 1), 0]
                        blocks.append(block)
                        component.append(0)
                blocks += [cb[my, mx], cr[my, mx]]
                component += [1, 2]
        want = entropy.scan_symbols(np.array(blocks), np.array(component, np.int8), (0, 1, 1))
        got = entropy.scan_interleaved(luma, cb, cr, h, v)
        np.testing.assert_array_equal(got.event, want.event)
        np.testing.assert_array_equal(got.extra, want.extra)
        np.testing.assert_array_equal(got.histogram, want.histogram)
        np.testing.assert_array_equal(got.extra_bits, want.extra_bits)


def test_interleaved_scan_refuses_coefficients_beyond_baseline():
    import numpy as np
    import pytest

    luma = np.zeros((2, 2, 64), np.int32)
    luma[0, 0, 3] = 40000
    chroma = np.zeros((1, 1, 64), np.int16)
    with pytest.raises(ValueError, match="beyond baseline"):
        entropy.scan_interleaved(luma, chroma, chroma, 2, 2)
