"""Volumes: the scalar field with its world geometry, and the readers that build it.

A :class:`Volume` is a float32 field indexed ``[x, y, z]`` with an index -> world affine in
millimetres (README, "Conventions"). :func:`load_volume` picks the reader by suffix (``nrrd.py``
for ``.nrrd``/``.nhdr``, ``npy.py`` for ``.npy``); each reader returns arrays and geometry and
never imports :mod:`.loading`, so readers and the type they feed form no cycle. ``summary.py``
is what ``tracer info`` prints; ``demo.py`` generates the bundled demo volumes.
"""

from .loading import load_volume
from .summary import VolumeSummary, summarize
from .volume import Volume, VolumeArrays

__all__ = ["Volume", "VolumeArrays", "load_volume", "summarize", "VolumeSummary"]
