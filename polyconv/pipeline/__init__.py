"""The pipeline of one product: validate -> plan -> run one engine -> shape.

``inputs`` checks every argument, ``facts`` measures integer operands, ``choose`` (one loop over
the engine registry) returns a :class:`~polyconv.pipeline.plan.Plan`, ``prepare`` runs those
stages and the memory check, ``execute`` runs a plan and ``shaping`` gives the result its mode,
dtype and axis.  Callers inside polyconv use ``execute.convolve_prepared`` (never
:mod:`polyconv.api`).
"""
