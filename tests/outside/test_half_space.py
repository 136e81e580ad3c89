"""An optically thick homogeneous slab under a directional light against the half-space laws.

Sources: for scattering = "medium", the Lommel-Seeliger law of single scattering by a semi-infinite homogeneous
medium, L / E = omega p(theta) mu0 / (mu0 + mu) (Chandrasekhar, *Radiative Transfer*, 1950; Hapke, *Theory of
Reflectance and Emittance Spectroscopy*, 1993), p the Henyey-Greenstein phase function per steradian (Henyey and
Greenstein 1941) at the scattering angle, here with g in {0, 0.6, -0.4}: the angle is chosen so that the sign of g
matters (g = 0.6 gives 1.8x the radiance of g = -0.4 at cos theta = 0.42). For scattering = "interface", the
closed form derived in this test from the README's model: the Lambert lobe mu0 / pi at every event, events
distributed as sigma exp(-sigma z / mu) dz / mu and shadow rays attenuated by exp(-sigma z / mu0), which integrate
to L / E = (rho mu0 / pi) mu0 / (mu0 + mu), darker than a Lambertian surface (rho mu0 / pi) by mu0 / (mu0 + mu).

The slab's field is linear in depth (exact under trilinear interpolation and central differences, so the normal
is +z everywhere) and the opacity is the same for every value, so the medium is homogeneous up to the box faces
(no surface inside the box, hence no step error). It is 10 mm thick at extinction 2 / mm: the light the bottom
adds is below exp(-20).
"""

import math

import numpy as np
import pytest

import tracer
from tests.reference.media import henyey_greenstein

from .scenes import camera_table, flat_transfer, image_mean_z, scene, slab_volume

SIGMA = 2.0                                    # per mm
ALBEDO = np.array([0.8, 0.6, 0.4])
VIEW_POLAR, LIGHT_POLAR = math.radians(50.0), math.radians(65.0)
TARGET = np.array([20.0, 20.0, 10.0])          # centre of the top face


def slab(tmp_path, scattering, g, step_mm=0.25, seed=5):
    volume = slab_volume(tmp_path)
    transfer = flat_transfer(tmp_path, 1 - math.exp(-SIGMA), ALBEDO, 0.0, 10.0)     # -ln(1 - a) = sigma x 1 mm
    d = np.array([math.sin(VIEW_POLAR), 0.0, -math.cos(VIEW_POLAR)])
    toward = [math.sin(LIGHT_POLAR), 0.0, math.cos(LIGHT_POLAR)]
    camera = camera_table(TARGET - 60 * d, TARGET, 1.0, 8, 8)
    path = scene(tmp_path, volume, transfer, camera, [{"kind": "directional", "toward": toward, "irradiance": [1.0] * 3}],
                 spp=4096, scattering=scattering, phase_g=g, step_mm=step_mm)
    return tracer.render(path, seed=seed), d, np.array(toward)


@pytest.mark.parametrize("g", [0.0, 0.6, -0.4])
def test_medium_slab_follows_lommel_seeliger(tmp_path, g):
    frame, d, toward = slab(tmp_path, "medium", g)
    mu, mu0 = -d[2], toward[2]
    law = ALBEDO * henyey_greenstein(float(d @ toward), g) * mu0 / (mu0 + mu)
    reference = np.broadcast_to(law, frame["radiance"].shape)
    z, relative = image_mean_z(frame["radiance"].astype(float), frame["radiance_variance"].astype(float), reference)
    assert np.all(np.abs(z) < 4), (z, relative)
    assert np.all(np.abs(relative) < 0.01), relative


def test_interface_slab_is_darker_than_lambert_by_mu0_over_mu0_plus_mu(tmp_path):
    frame, d, toward = slab(tmp_path, "interface", 0.0)
    mu, mu0 = -d[2], toward[2]
    lambert = ALBEDO * mu0 / math.pi
    reference = np.broadcast_to(lambert * mu0 / (mu0 + mu), frame["radiance"].shape)
    z, relative = image_mean_z(frame["radiance"].astype(float), frame["radiance_variance"].astype(float), reference)
    assert np.all(np.abs(z) < 4), (z, relative)
    assert np.all(np.abs(relative) < 0.01), relative
    # and not the Lambertian surface itself: that would be mu0 + mu over mu0 (here 2.5x) brighter
    assert frame["radiance"].mean(axis=(0, 1)) @ np.ones(3) < 0.5 * lambert.sum()
    np.testing.assert_allclose(frame["event1_normal"][..., 2], 1.0, atol=1e-5)
