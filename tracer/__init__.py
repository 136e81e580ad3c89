"""tracer: a CPU path tracer for volumes that writes what Monte Carlo denoisers need.

Renders of medical scans made with this tool are for research and teaching, not diagnosis.
"""

__version__ = "0.1.0"

from .errors import UserError  # noqa: E402
from .volumes import Volume, load_volume  # noqa: E402
from .optics.transfer import TransferFunction, load_transfer_function  # noqa: E402
from .scene import Scene, load_scene  # noqa: E402
from .rendering.buffers import Frame  # noqa: E402


def render(scene, **options):
    """Render a :class:`Scene` (or a scene file path); see :func:`tracer.rendering.passes.render`."""
    from .rendering.passes import render as _render

    if not isinstance(scene, Scene):
        scene = load_scene(scene)
    return _render(scene, **options)


def merge(frames):
    """Pool renders with disjoint sample ranges into the render of their union; see
    :func:`tracer.rendering.accumulate.merge_frames`."""
    from .rendering.accumulate import merge_frames

    return merge_frames(list(frames))


__all__ = ["UserError", "Volume", "load_volume", "TransferFunction", "load_transfer_function", "Scene",
           "load_scene", "Frame", "render", "merge", "__version__"]
