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
