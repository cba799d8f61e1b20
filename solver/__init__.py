"""shockslate solver: a 2D planar / axisymmetric finite-volume Euler solver.

Knows nothing of the web. Data flows one way: sketch -> shapes -> mask -> kernel -> fields.
"""
