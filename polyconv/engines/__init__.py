"""Convolution engines: plain functions on arrays, one algorithm per module.

Every engine computes the *full* linear convolution along the last axis of two arrays whose
leading axes broadcast.  Engines never validate user input and never call or choose another engine:
``polyconv.pipeline.choose`` chooses, ``polyconv.api`` validates and shapes.
"""
