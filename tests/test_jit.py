"""The engine's compiled-loop decorator (dct/jit.py)."""

import numpy as np

from dct.jit import kernel


def test_a_kernel_runs_where_no_cache_can_be_kept():
    # A function whose source file does not exist has no cache location (as in a read-only or
    # frozen install): it must still compile, in memory, rather than fail at import.
    namespace = {"np": np}
    exec(compile("def total(a):\n    s = 0\n    for v in a:\n        s += v\n    return s\n", "<generated>", "exec"),
         namespace)
    compiled = kernel(namespace["total"])
    assert compiled(np.arange(10)) == 45


def test_an_inlined_helper_gives_the_same_results_in_its_caller():
    namespace = {"np": np, "kernel": kernel}
    source = ("@kernel(inline=True)\ndef step(v):\n    return 3 * v + 1\n\n"
              "@kernel\ndef apply(a):\n    out = np.empty_like(a)\n    for i in range(a.size):\n"
              "        out[i] = step(a[i])\n    return out\n")
    exec(compile(source, "<generated>", "exec"), namespace)
    np.testing.assert_array_equal(namespace["apply"](np.arange(5)), 3 * np.arange(5) + 1)
    assert namespace["step"](2) == 7


def test_bit_intrinsics_equal_pythons_integers():
    """trailing_zeros, bit_length and popcount inside a kernel against Python's own integer arithmetic."""
    from dct.jit import bit_length, popcount, trailing_zeros

    @kernel
    def both(values, zeros, lengths):
        for i in range(values.size):
            zeros[i] = trailing_zeros(values[i])
            lengths[i] = bit_length(values[i])

    @kernel
    def ones(values, out):
        for i in range(values.size):
            out[i] = popcount(values[i])

    rng = np.random.default_rng(3)
    values = np.concatenate([[0, 1, 2, 3, 1 << 40, (1 << 63) - 1],
                             rng.integers(1, 1 << 62, 200) >> rng.integers(0, 62, 200)]).astype(np.int64)
    zeros, lengths = np.empty_like(values), np.empty_like(values)
    both(values, zeros, lengths)
    assert lengths.tolist() == [int(v).bit_length() for v in values]
    assert zeros.tolist() == [64 if v == 0 else (int(v) & -int(v)).bit_length() - 1 for v in values]
    counts = np.empty_like(values)
    ones(values, counts)
    assert counts.tolist() == [bin(int(v)).count("1") for v in values]
    masks = np.array([1 << 63, 1 << 5, 0], np.uint64)
    z, n = np.empty(3, np.uint64), np.empty(3, np.uint64)
    both(masks, z, n)
    assert z.tolist() == [63, 5, 64] and n.tolist() == [64, 6, 0]
