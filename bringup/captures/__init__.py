"""Capture files: scope and logger records saved to disk (CSV, NumPy ``.npy`` and ``.npz``).

``files.read_capture`` reads one into time and channel arrays for ``bringup analyze``; every
problem is one ``InputError`` naming the file and the row or array.
"""

from bringup.captures.files import Capture, read_capture

__all__ = ["Capture", "read_capture"]
