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
