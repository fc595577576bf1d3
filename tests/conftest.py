"""Fixtures shared by several test layers (pytest puts this folder on sys.path, so the helper
modules beside it, e.g. ``flint_rows``, import by name)."""

import pytest


@pytest.fixture(scope="module")
def batch_kernels():
    """Compile or load the batched kernels once per module (skipped where they cannot run,
    e.g. POLYCONV_JIT=0)."""
    from polyconv.engines import jit_state as jit

    try:
        return jit.kernels("_kernels_batch")
    except jit.JitUnavailableError as exc:
        pytest.skip(str(exc))


@pytest.fixture
def counted(monkeypatch):
    """Count calls of the pipeline's validating entry point (``inputs.prepare_pair``: every
    polyconv.convolve classifies its operands there) and of the chooser used for blocks."""
    from polyconv.pipeline import inputs
    from polyconv.scale import blocks

    calls = {"prepare_pair": 0, "choose": 0}
    prepare_pair, choose = inputs.prepare_pair, blocks.choose

    def counting_prepare(*args, **kwargs):
        calls["prepare_pair"] += 1
        return prepare_pair(*args, **kwargs)

    def counting_choose(*args, **kwargs):
        calls["choose"] += 1
        return choose(*args, **kwargs)

    monkeypatch.setattr(inputs, "prepare_pair", counting_prepare)
    monkeypatch.setattr(blocks, "choose", counting_choose)
    return calls
