"""Numerical routines with no statistics objects in them: distribution functions on
``scipy.special``, a root finder and adaptive quadrature. Every layer above may use them."""
