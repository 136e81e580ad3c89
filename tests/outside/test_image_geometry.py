"""Where things land in the image, and which side the environment lights, against geometry written in the test.

Sources: the pinhole projection of the README's "Conventions" (Images) written out in tests/reference/camera.py;
the lat-long convention of the README's "Conventions" (Environment) turned into a direction by hand here; Lambert's
cosine law (an opaque ball lit from one direction is brightest where its normal faces that direction).
"""

import math

import numpy as np
import pytest

import tracer
from tests.reference.camera import Pinhole
from tests.reference.files import write_latlong, write_transfer, write_volume

from .scenes import ball_transfer, ball_volume, camera_table, scene

CUBE_LOW = np.array([29.5, 2.5, 13.5])     # the 0.5 iso-surface of a block of ones at voxels 30-33, 3-6, 14-17
CUBE_HIGH = np.array([33.5, 6.5, 17.5])


def cube_files(folder):
    field = np.zeros((40, 30, 20), np.float32)
    field[30:34, 3:7, 14:18] = 1.0             # near the high-x, low-y, high-z corner: asymmetric on every axis
    volume = write_volume(folder / "cube.nrrd", field, np.eye(3), (0.0, 0.0, 0.0))
    transfer = write_transfer(folder / "cube.toml", [[0.0, 0.0], [0.49, 0.0], [0.51, 1.0], [1.0, 1.0]],
                              [[0.0, [0.7, 0.7, 0.7]], [1.0, [0.7, 0.7, 0.7]]])
    return volume, transfer


@pytest.mark.parametrize("fov", [30.0, 50.0])
def test_an_off_centre_cube_lands_where_the_pinhole_projection_puts_it(tmp_path, fov):
    volume, transfer = cube_files(tmp_path)
    view = dict(position=(-30.0, -40.0, 50.0), target=(19.5, 14.5, 9.5), fov_deg=fov)
    width, height = 96, 64
    path = scene(tmp_path, volume, transfer, camera_table(**view, width=width, height=height), [], None,
                 spp=4, scattering="interface", step_mm=0.1)
    alpha = tracer.render(path)["alpha"]
    corners = np.array([[x, y, z] for x in (CUBE_LOW[0], CUBE_HIGH[0]) for y in (CUBE_LOW[1], CUBE_HIGH[1])
                        for z in (CUBE_LOW[2], CUBE_HIGH[2])])
    projected = Pinhole(**view, width=width, height=height).project(corners)      # (row, col), continuous
    rows, cols = np.nonzero(alpha > 0.5)
    assert rows.size > 10
    # a pixel index k spans [k, k + 1), its centre at k + 0.5. The rectangle's edges are single projected corners,
    # so the outermost pixel more than half covered may lie up to a pixel inside them: 1.5 pixels allowed (a flip,
    # a swapped axis or a wrong field of view moves them by tens of pixels)
    assert abs(rows.min() + 0.5 - projected[:, 0].min()) < 1.5, (rows.min(), projected[:, 0].min())
    assert abs(rows.max() + 0.5 - projected[:, 0].max()) < 1.5, (rows.max(), projected[:, 0].max())
    assert abs(cols.min() + 0.5 - projected[:, 1].min()) < 1.5, (cols.min(), projected[:, 1].min())
    assert abs(cols.max() + 0.5 - projected[:, 1].max()) < 1.5, (cols.max(), projected[:, 1].max())
    # and the covered area's centroid within half a pixel of the projected cube's (a 4 mm cube 80 mm away: the
    # perspective shift between the two is far below that)
    grid_rows, grid_cols = np.mgrid[0:height, 0:width] + 0.5
    weight = alpha / alpha.sum()
    centroid = np.array([(weight * grid_rows).sum(), (weight * grid_cols).sum()])
    centre = Pinhole(**view, width=width, height=height).project((CUBE_LOW + CUBE_HIGH) / 2)
    assert np.linalg.norm(centroid - centre) < 0.5, (centroid, centre)


BALL_VIEW = dict(position=(0.0, -40.0, 0.0), target=(0.0, 0.0, 0.0), fov_deg=16.0)


def lit_ball(folder, environment, size=64, spp=256):
    volume = ball_volume(folder)
    transfer = ball_transfer(folder, 1.0, [0.8, 0.8, 0.8], radius=4.0, edge=0.05)
    path = scene(folder, volume, transfer, camera_table(**BALL_VIEW, width=size, height=size), [], environment,
                 spp=spp, scattering="interface", step_mm=0.05)
    return tracer.render(path, seed=3)


@pytest.mark.parametrize("texel", [(5, 4), (10, 18)])
def test_one_bright_texel_lights_the_matching_side_of_a_ball(tmp_path, texel):
    h, w = 16, 32
    image = np.zeros((h, w, 3), np.float32)
    image[texel] = 400.0
    env = write_latlong(tmp_path / "texel.exr", image)
    frame = lit_ball(tmp_path, {"kind": "image", "path": str(env), "background": [0.0, 0.0, 0.0]})
    polar = (texel[0] + 0.5) / h * math.pi                 # README: row r at polar (r + 0.5) / h x 180 degrees from +z
    azimuth = (texel[1] + 0.5) / w * 2 * math.pi           # column c at azimuth (c + 0.5) / w x 360 degrees, +x to +y
    direction = np.array([math.sin(polar) * math.cos(azimuth), math.sin(polar) * math.sin(azimuth), math.cos(polar)])
    pinhole = Pinhole(**BALL_VIEW, width=64, height=64)
    centre, lit_point = pinhole.project(np.array([[0.0, 0.0, 0.0], 4.0 * direction]))
    luminance = frame["radiance"].astype(float).mean(axis=-1)
    rows, cols = np.mgrid[0:64, 0:64] + 0.5
    weight = luminance / luminance.sum()
    centroid = np.array([(weight * rows).sum(), (weight * cols).sum()])
    expected, measured = lit_point - centre, centroid - centre
    cosine = expected @ measured / (np.linalg.norm(expected) * np.linalg.norm(measured))
    assert cosine > math.cos(math.radians(20)), (expected, measured)


def test_the_sky_lights_the_top_of_a_ball_and_the_ground_its_bottom(tmp_path):
    frame = lit_ball(tmp_path, {"kind": "sky", "zenith": [1.0, 1.0, 1.0], "horizon": [0.3, 0.3, 0.3],
                                "ground": [0.02, 0.02, 0.02], "background": [0.0, 0.0, 0.0]}, spp=64)
    luminance = frame["radiance"].astype(float).mean(axis=-1)
    top, bottom = luminance[:32].sum(), luminance[32:].sum()          # row 0 is the top, world +z up
    assert top > 2 * bottom, (top, bottom)       # measured 2.9x


def blobs(points):
    """Two Gaussian blobs of different sizes off the centre (mm): any rotation or flip of the volume shows."""
    a = np.exp(-((points - np.array([2.0, -1.0, 1.0])) ** 2).sum(-1) / (2 * 2.0 ** 2))
    b = 0.8 * np.exp(-((points - np.array([-2.5, 1.5, -1.0])) ** 2).sum(-1) / (2 * 1.2 ** 2))
    return a + b


def rotation(axis, degrees):
    """Rodrigues' rotation formula."""
    k = np.asarray(axis, float) / np.linalg.norm(axis)
    cross = np.array([[0, -k[2], k[1]], [k[2], 0, -k[0]], [-k[1], k[0], 0]])
    angle = math.radians(degrees)
    return np.eye(3) + math.sin(angle) * cross + (1 - math.cos(angle)) * cross @ cross


def render_blobs(folder, name, field, directions, origin, seed=5):
    volume = write_volume(folder / f"{name}.nrrd", field.astype(np.float32), directions, origin)
    transfer = write_transfer(folder / "blobs.toml", [[0.0, 0.0], [0.1, 0.0], [1.0, 0.6]],
                              [[0.0, [0.9, 0.4, 0.2]], [1.0, [0.2, 0.6, 0.9]]])
    camera = camera_table((14.0, -26.0, 9.0), (0.0, 0.0, 0.0), 32.0, 32, 32)
    light = {"kind": "directional", "toward": [0.4, -0.6, 0.7], "irradiance": [2.0, 2.0, 2.0]}
    path = scene(folder, volume, transfer, camera, [light], {"kind": "constant", "radiance": [0.2, 0.2, 0.2]},
                 name=f"{name}.toml", spp=256, scattering="medium", step_mm=0.1)
    return tracer.render(path, seed=seed)


def test_an_oblique_anisotropic_volume_renders_like_its_axis_aligned_resampling(tmp_path):
    """The same world-space field stored twice: on an oblique grid (rotated 30 degrees about (1, 2, 3), voxels
    0.5 x 0.7 x 0.6 mm) and resampled in the test onto an axis-aligned 0.3 mm grid (``scipy.ndimage.map_coordinates``,
    order 1). The two renders agree to within the resampling's blur: alpha within 0.01 per pixel and radiance within
    1% on average (measured 0.003 and 0.02%; the same seed, so the noise largely cancels). The oblique file with its
    rotation dropped differs by 0.47 in alpha: the check sees orientation errors 10x over."""
    from scipy import ndimage

    shape = np.array([48, 40, 44])
    matrix = rotation((1, 2, 3), 30.0) @ np.diag([0.5, 0.7, 0.6])          # columns: world steps of i, j, k
    origin = -matrix @ ((shape - 1) / 2)
    index = np.stack(np.meshgrid(*[np.arange(n) for n in shape], indexing="ij"), axis=-1).astype(float)
    oblique = blobs(index @ matrix.T + origin)
    oblique_frame = render_blobs(tmp_path, "oblique", oblique, matrix.T, origin)

    axis = np.arange(-8.0, 8.0 + 1e-9, 0.3)
    world = np.stack(np.meshgrid(axis, axis, axis, indexing="ij"), axis=-1)
    coordinates = np.linalg.solve(matrix, (world - origin).reshape(-1, 3).T)
    aligned = ndimage.map_coordinates(oblique, coordinates, order=1, cval=0.0).reshape(world.shape[:3])
    aligned_frame = render_blobs(tmp_path, "aligned", aligned, np.eye(3) * 0.3, (axis[0],) * 3)

    alpha_difference = np.abs(oblique_frame["alpha"] - aligned_frame["alpha"]).max()
    radiance_difference = np.abs(oblique_frame["radiance"] - aligned_frame["radiance"]).mean() \
        / aligned_frame["radiance"].mean()
    assert alpha_difference < 0.01, alpha_difference
    assert radiance_difference < 0.01, radiance_difference

    wrong = render_blobs(tmp_path, "ignored_directions", oblique, np.diag([0.5, 0.7, 0.6]), origin)
    assert np.abs(wrong["alpha"] - aligned_frame["alpha"]).max() > 10 * alpha_difference
