"""Numerical core: numpy, scipy and the standard library only.

Nothing in this package may import Flask, marshmallow, pint or read the environment. Inputs are
frozen dataclasses in SI units (temperatures in degC), results are frozen dataclasses with a
`Convergence` record.
"""
