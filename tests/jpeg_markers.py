"""A small JPEG marker-segment reader for tests (ITU-T T.81 Annex B), so tests can inspect libjpeg output."""


def segments(data: bytes):
    """Yield (marker, payload) for every marker segment before the entropy-coded data, then ('SOS', payload)."""
    assert data[:2] == b"\xff\xd8", "not a JPEG file (no SOI)"
    pos = 2
    while pos < len(data):
        assert data[pos] == 0xFF, f"expected a marker at byte {pos}"
        marker = data[pos + 1]
        length = int.from_bytes(data[pos + 2 : pos + 4], "big")
        payload = data[pos + 4 : pos + 2 + length]
        yield marker, payload
        pos += 2 + length
        if marker == 0xDA:  # SOS: the entropy-coded segment follows
            return


def huffman_tables(data: bytes):
    """{(class, id): (bits[16], values)} from the DHT segments (T.81 B.2.4.2)."""
    tables = {}
    for marker, payload in segments(data):
        if marker != 0xC4:
            continue
        p = 0
        while p < len(payload):
            tc, th = payload[p] >> 4, payload[p] & 15
            bits = list(payload[p + 1 : p + 17])
            n = sum(bits)
            tables[(tc, th)] = (bits, list(payload[p + 17 : p + 17 + n]))
            p += 17 + n
    return tables


def scan_bytes(data: bytes) -> bytes:
    """The entropy-coded segment (between the SOS header and EOI), stuffing included."""
    pos = 2
    for marker, payload in segments(data):
        pos += 4 + len(payload)
    return data[pos:-2]
