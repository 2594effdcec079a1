"""Round trips of a lift group: the building model, ideal kinematics, the
classical up-peak formulae and (in :mod:`roundtrip.montecarlo`) the Monte
Carlo estimator with its compiled kernels.

Importing this package is cheap: numba is imported only by the Monte Carlo
modules, so the classical calculation starts fast.
"""
__version__ = "0.1.0"
