"""The orientation check of ``tracer info --axes``: three small renders with the world axes drawn.

A converted volume that came out mirrored or rotated shows it here at a glance: each panel is a
quick render from a named direction (the default camera, from +x, from above), with the world
axes drawn from the volume's centre, labelled with their anatomical names where the file names a
patient space, the box outline, and a dot on the voxel at index (0, 0, 0).
"""

from __future__ import annotations

import numpy as np

#: Colours of the +x, +y, +z arrows (our own choice: orange, teal, violet).
AXIS_COLOURS = ("#e07b1f", "#138a8a", "#7a4fc4")
PANEL_SIZE = 160


def auto_transfer_function(volume):
    """A neutral transfer function from the value percentiles: transparent below 35% of the way from the
    median to the 99.5th percentile, rising to opacity 0.6 per mean voxel spacing at 70% of the way."""
    from ..optics.transfer import TransferFunction

    data = volume.data                         # assembled from the bricks once
    finite = data[np.isfinite(data)]
    median, top = (float(v) for v in np.percentile(finite, [50, 99.5]))
    if not top > median:
        median, top = float(finite.min()), float(finite.max())
    if not top > median:
        top = median + 1.0
    v0, v1 = median + 0.35 * (top - median), median + 0.7 * (top - median)
    return TransferFunction(opacity_values=np.array([v0, v1]), opacity=np.array([0.0, 0.6]),
                            color_values=np.array([v0]), colors=np.array([[0.8, 0.8, 0.78]]),
                            reference_length_mm=float(np.mean(volume.spacing)), name="orientation check")


def views(volume):
    """(title, camera) of the three panels."""
    from ..scene.camera import Camera, default_view

    centre = tuple(float(v) for v in volume.center)
    radius = volume.bounding_radius
    default = default_view(volume)
    side = tuple(np.asarray(centre) + radius * np.array([3.4, 0.0, 0.0]))
    above = tuple(np.asarray(centre) + radius * np.array([0.0, 0.0, 3.4]))
    size = dict(width=PANEL_SIZE, height=PANEL_SIZE)
    return [("default camera", Camera(position=default.position, target=centre, **size)),
            ("from +x", Camera(position=side, target=centre, up=(0.0, 0.0, 1.0), **size)),
            ("from +z (above), +y up", Camera(position=above, target=centre, up=(0.0, 1.0, 0.0), **size))]


def write_axes_check(volume, path, *, transfer_function=None, spp: int = 16):
    """Render the three views of ``volume`` and write the labelled PNG to ``path``; returns the path."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from ..io.atomic import atomic_path
    from ..rendering.passes import render
    from ..scene import Environment, Light, RenderSettings, Scene
    from ..volumes.orientation import toward
    from .png import to_display

    tf = transfer_function or auto_transfer_function(volume)
    settings = RenderSettings(spp=spp, seed=0, step_mm=float(min(volume.spacing)) / 2.0, events=1)
    centre = np.asarray(volume.center)
    length = 0.75 * volume.bounding_radius
    figure, axes = plt.subplots(1, 3, figsize=(9.6, 3.7), layout="constrained")
    for axis, (title, camera) in zip(axes, views(volume)):
        forward, right, up = camera.frame()
        toward_light = -forward + 0.6 * up + 0.4 * right
        light = Light(kind="directional", vector=tuple(toward_light / np.linalg.norm(toward_light)), power=(2.2,) * 3)
        environment = Environment(kind="constant", colors=((0.35,) * 3, (0.0,) * 3, (0.0,) * 3),
                                  background=(0.06, 0.06, 0.07))
        scene = Scene(volume=volume, transfer_function=tf, camera=camera, lights=(light,), environment=environment,
                      settings=settings, source=f"{volume.source} (orientation check)")
        frame = render(scene)
        axis.imshow(to_display(frame["radiance"]), extent=(0, camera.width, camera.height, 0))
        corners = volume.corners
        projected = camera.project(corners)
        for a in range(8):
            for b in range(a + 1, 8):
                if bin(a ^ b).count("1") == 1:
                    axis.plot(projected[[a, b], 1], projected[[a, b], 0], color="0.55", lw=0.6)
        axis.plot(projected[0, 1], projected[0, 0], "o", color="white", ms=4, mec="black", mew=0.6)
        start = camera.project(centre[None])[0]
        for world_axis in range(3):
            tip = centre.copy()
            tip[world_axis] += length
            end = camera.project(tip[None])[0]
            if np.hypot(*(end - start)) < 3:          # the axis points at the camera or away from it
                label = toward(np.eye(3)[world_axis], volume.space)
                sign = "toward you" if np.dot(np.eye(3)[world_axis], forward) < 0 else "away from you"
                axis.text(4, camera.height - 6, f"{label}: {sign}", color=AXIS_COLOURS[world_axis], fontsize=8,
                          fontweight="bold", bbox=dict(boxstyle="round,pad=0.15", fc=(1, 1, 1, 0.75), ec="none"))
                continue
            axis.annotate("", xy=(end[1], end[0]), xytext=(start[1], start[0]),
                          arrowprops=dict(arrowstyle="-|>", color=AXIS_COLOURS[world_axis], lw=1.6))
            axis.text(end[1], end[0], " " + toward(np.eye(3)[world_axis], volume.space), color=AXIS_COLOURS[world_axis],
                      fontsize=8, fontweight="bold", ha="left", va="center",
                      bbox=dict(boxstyle="round,pad=0.15", fc=(1, 1, 1, 0.75), ec="none"))
        axis.set_xlim(0, camera.width)
        axis.set_ylim(camera.height, 0)
        axis.set_axis_off()
        axis.set_title(title, fontsize=9)
    space = volume.space or "no space named"
    figure.suptitle(f"{volume.source.split('/')[-1]}: world axes ({space}); white dot: voxel (0, 0, 0)", fontsize=9)
    with atomic_path(path) as temporary:
        figure.savefig(temporary, dpi=100, format="png")
    plt.close(figure)
    return path
