"""The engine registry: every engine by its ``method=`` name.

Each record (:class:`polyconv.engines._common.Engine`) says which operand kinds the engine serves,
how it prices a job (its option function, beside its kernel), how it runs a plan, whether its
output is already reduced by the modulus, and what the plan's reason adds about it.  The chooser
(:mod:`polyconv.pipeline.choose`) is one loop over :data:`REGISTRY`; the runner
(:mod:`polyconv.pipeline.execute`) looks the plan's engine up here.  Adding an engine: one module
with its kernel, option and run functions and an ``Engine`` record, one line below, and its
constants in the cost table and its calibration.
"""

from __future__ import annotations

from . import (
    direct,
    exact_direct,
    exact_fft,
    fft,
    kronecker,
    ntt,
    ntt_batch_plan,
    ntt_compiled_plan,
    ntt_wide_plan,
    overlap_add,
)
from ._common import Engine

#: Engines in the order plans list them on a tie (float first, then exact).
REGISTRY: dict[str, Engine] = {e.name: e for e in (
    direct.ENGINE,
    fft.ENGINE,
    overlap_add.ENGINE,
    exact_direct.ENGINE,
    exact_fft.ROUNDED,
    exact_fft.LIMBS,
    kronecker.ENGINE,
    ntt.ENGINE,
    ntt_compiled_plan.ENGINE,
    ntt_batch_plan.ENGINE,
    ntt_wide_plan.ENGINE,
)}

FLOAT_ENGINES = tuple(name for name, e in REGISTRY.items() if not e.exact)
EXACT_ENGINES = tuple(name for name, e in REGISTRY.items() if e.exact)
