"""``scipy.special`` for the command-line program, without the NumPy submodules it never uses.

``import scipy.special`` (SciPy 1.15 to 1.17) runs ``from numpy import *`` and reads every name
of ``dir(numpy)`` in SciPy's private array-API layer (``scipy._lib.array_api_compat.numpy``,
which copies NumPy's namespace). NumPy 2 loads its submodules ``f2py``, ``testing``, ``ma``,
``polynomial``, ``random``, ``ctypeslib``, ``rec``, ``char``, ``strings``, … on first access and
lists them in ``numpy.__all__`` and ``dir(numpy)``, so that copy imports every one of them:
about half of the time ``import scipy.special`` takes, none of it used by this program
(``numpy.f2py`` alone compiles some hundred regular expressions).

:func:`import_special_lean` imports ``scipy.special`` with those submodules, where they are not
loaded yet, left out of ``numpy.__all__`` and ``dir(numpy)``, and puts both back as they were
(the same objects) right after. NumPy itself is unchanged: its submodules still load on first
access. The one lasting difference is SciPy's private copy of the namespace, which lacks them as
attributes; SciPy reads that copy only for array functions (``asarray``, ``where``, ``linalg``,
…, and ``testing`` only for CuPy and PyTorch arrays), so the values SciPy computes are the same.

Only the command-line program calls it, in its own process, before anything else imports SciPy
(:func:`reporter.cli.main`); a program that uses ``reporter`` as a library imports SciPy the
plain way and nothing of NumPy or SciPy is touched.
"""

from __future__ import annotations

import sys

_MISSING = object()


def import_special_lean():
    """``scipy.special``, imported as described in the module docstring when it is not loaded yet."""
    if "scipy.special" in sys.modules:
        return sys.modules["scipy.special"]
    import numpy

    lazy = getattr(numpy, "__numpy_submodules__", None)
    listed = numpy.__dict__.get("__all__", _MISSING)
    listing = numpy.__dict__.get("__dir__", _MISSING)
    if not lazy or listed is _MISSING or listing is _MISSING:  # another NumPy: the plain import
        import scipy.special

        return scipy.special
    unloaded = {name for name in lazy if f"numpy.{name}" not in sys.modules}
    try:
        numpy.__all__ = [name for name in listed if name not in unloaded]
        numpy.__dir__ = lambda: [name for name in listing() if name not in unloaded]
        import scipy.special
    finally:
        numpy.__all__ = listed
        numpy.__dir__ = listing
    return scipy.special
