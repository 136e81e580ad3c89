"""tracer: a CPU path tracer for volumes that writes what Monte Carlo denoisers need.

Renders of medical scans made with this tool are for research and teaching, not diagnosis.
"""

__version__ = "0.1.0"

from .errors import UserError  # noqa: E402
from .volume import Volume, load_volume  # noqa: E402
from .transfer import TransferFunction, load_transfer_function  # noqa: E402
from .scene import Scene, load_scene  # noqa: E402
from .buffers import Frame  # noqa: E402


def render(scene, **options):
    """Render a :class:`Scene` (or a scene file path); see :func:`tracer.rendering.render`."""
    from .rendering import render as _render

    if not isinstance(scene, Scene):
        scene = load_scene(scene)
    return _render(scene, **options)


def merge(frames):
    """Merge renders with disjoint sample ranges; see :func:`tracer.accumulate.merge_frames`."""
    from .accumulate import merge_frames

    return merge_frames(list(frames))


__all__ = ["UserError", "Volume", "load_volume", "TransferFunction", "load_transfer_function", "Scene",
           "load_scene", "Frame", "render", "merge", "__version__"]
