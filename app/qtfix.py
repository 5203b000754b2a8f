"""A guard against a reference-count fault of the Qt bindings on Python 3.11.

PySide6 6.12 (shiboken6 6.12) returns ``None`` from every C++ method that returns
``void`` without taking a reference to it, and does the same with ``True``/``False`` in
some paths; the fault is invisible on Python ≥ 3.12, where these objects are immortal
(PEP 683), but on 3.11 each call takes one reference away, and after some thousands of
calls Python aborts with "Fatal Python error: none_dealloc".  The counts measured here:
one reference of ``None`` per call of ``QLabel.setText``, ``QPainter.setPen``,
``QPixmap.fill`` …

:func:`guard_singletons` gives ``None``, ``True`` and ``False`` so many references
that they can never reach zero — what PEP 683 does for them on Python 3.12.  It does
nothing on 3.12 and later.  The real cure is a binding without the fault (or
Python ≥ 3.12 for the app); this guard keeps the app alive until then.
"""

from __future__ import annotations

import ctypes
import sys

#: References added to each singleton: far more than any session can take away
#: (2**60, against the 2**63 − 1 a Py_ssize_t holds).
HEADROOM = 1 << 60
_SINGLETONS = (None, True, False)


def _refcount_field(obj: object) -> ctypes.c_ssize_t:
    # ob_refcnt is the first member of every PyObject in a release build of CPython.
    return ctypes.c_ssize_t.from_address(id(obj))


def guard_singletons() -> bool:
    """Make None, True and False effectively immortal on Python < 3.12.

    Returns
    -------
    bool
        True when the guard was applied now, False when it was not needed (Python
        ≥ 3.12, or already applied).
    """
    if sys.version_info >= (3, 12) or sys.implementation.name != "cpython":
        return False
    applied = False
    for obj in _SINGLETONS:
        field = _refcount_field(obj)
        if field.value < HEADROOM // 2:
            field.value += HEADROOM
            applied = True
    return applied
