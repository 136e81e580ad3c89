"""Rendering: passes and stopping rules around the path kernel, accumulation, checkpoints, the buffer table.

``passes.py`` holds :func:`render` (pass planning, stopping rules and Ctrl-C handling as separate
parts); ``arguments.py`` turns a scene into the kernel's arrays and codes; ``accumulate.py`` the
float64 running sums, their conversion to buffers and the exact pooling of disjoint sample
ranges; ``checkpoint.py`` saving and resuming; ``noise.py`` a render's residual noise;
``buffers.py`` the buffer table and :class:`Frame`; ``preview.py`` the quick preview.
"""

from .accumulate import Accumulator, merge_frames
from .buffers import BufferSpec, Frame, buffer_specs
from .noise import ResidualNoise, residual_noise
from .passes import RenderProgress, describe_stop, render
from .preview import preview_scene

__all__ = ["render", "RenderProgress", "describe_stop", "preview_scene", "Frame", "BufferSpec", "buffer_specs",
           "Accumulator", "merge_frames", "ResidualNoise", "residual_noise"]
