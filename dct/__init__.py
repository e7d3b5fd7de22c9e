"""Eightfold's engine: block-DCT simulation of baseline JPEG settings, and the budget decision.

The public facade (keep these names stable):

* :func:`quant_tables` — Annex K tables scaled by an IJG quality factor, with a zigzag cutoff;
* :func:`simulate` — one setting on one image: estimated bytes, SSIM, PSNR, SSIM map, reconstruction;
* :func:`sweep` — many settings on one image, transforming it once per subsampling mode;
* :func:`dct_matrix` — the orthonormal DCT-II matrix.
"""

from . import simulate as _simulate
from .simulate import PreparedImage, Simulation, SweepPoint
from .tables import SUBSAMPLINGS, Setting, quant_tables
from .threads import engine_call
from .transform import dct_matrix

# The facade limits BLAS and OpenCV to one thread per call (dct.threads): fast in any process.
simulate = engine_call(_simulate.simulate)
sweep = engine_call(_simulate.sweep)

__version__ = "0.1.0"

__all__ = [
    "PreparedImage",
    "SUBSAMPLINGS",
    "Setting",
    "Simulation",
    "SweepPoint",
    "dct_matrix",
    "quant_tables",
    "simulate",
    "sweep",
]
