"""Numerical facts every layer shares: integer limits, a-priori error bounds, a-posteriori checks,
the FFT binding and the memory budget.  Nothing here imports an engine or the pipeline."""
