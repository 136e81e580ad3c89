"""Multiple scattering against closed forms: the semi-infinite half-space and the white furnace.

Sources: the reflection of a semi-infinite, homogeneous, isotropically scattering medium with single-scattering
albedo omega, lit by a directional light at polar cosine mu0 and seen at cosine mu, is
L / (E mu0) = (omega / 4 pi) H(mu) H(mu0) / (mu + mu0), with Chandrasekhar's H-function computed in
``tests/reference/media.py`` by iterating its integral equation (Chandrasekhar, *Radiative Transfer*, 1960); its
single-scattering part is (omega / 4 pi) / (mu + mu0) (the Lommel-Seeliger law). The white furnace: a medium that
scatters without absorbing, under a uniform environment of radiance L, is invisible (energy conservation; every
path eventually leaves with the environment's radiance), whatever its density.
"""

import math
from pathlib import Path

import numpy as np
import pytest

import tracer
from tests.reference.files import write_transfer, write_volume
from tests.reference.media import chandrasekhar_h

from .scenes import camera_table, flat_transfer, scene

SIGMA = 2.0                      # per mm: the slab is 30 mm thick (optical depth 60) and 80 mm wide
WIDTH_MM, DEPTH_MM = 80.0, 30.0
TOP = np.array([WIDTH_MM / 2, WIDTH_MM / 2, DEPTH_MM])


def half_space(tmp_path, omega, mu, bounces, estimator, spp, seed=11):
    volume = write_volume(tmp_path / "slab.nrrd", np.ones((3, 3, 3), np.float32),
                          np.diag([WIDTH_MM / 2, WIDTH_MM / 2, DEPTH_MM / 2]), (0.0, 0.0, 0.0))
    transfer = flat_transfer(tmp_path, 1 - math.exp(-SIGMA), [omega] * 3, 0.0, 2.0)
    d = np.array([math.sqrt(1 - mu * mu), 0.0, -mu])
    camera = camera_table(TOP - 100 * d, TOP, 1.0, 6, 6, up=(0.0, 1.0, 0.0) if mu == 1.0 else (0.0, 0.0, 1.0))
    light = {"kind": "directional", "toward": [0.0, 0.0, 1.0], "irradiance": [1.0] * 3}
    path = scene(tmp_path, volume, transfer, camera, [light], spp=spp, scattering="medium", phase_g=0.0,
                 bounces=bounces, estimator=estimator, step_mm=0.25)
    frame = tracer.render(path, seed=seed)
    radiance = frame["radiance"].astype(float).mean(axis=(0, 1))
    standard_error = np.sqrt(frame["radiance_variance"].astype(float).sum(axis=(0, 1))) / 36
    return radiance, standard_error


CASES = [(omega, mu, "track") for omega in (0.5, 0.9, 0.99) for mu in (1.0, 0.5)] + [(0.9, 0.5, "march"), (0.99, 1.0, "march")]


@pytest.mark.parametrize("omega, mu, estimator", CASES)
def test_half_space_reflection_follows_chandrasekhar(tmp_path, omega, mu, estimator):
    radiance, standard_error = half_space(tmp_path, omega, mu, 4096, estimator, spp=4096)
    law = omega / (4 * math.pi) * chandrasekhar_h(omega, mu) * chandrasekhar_h(omega, 1.0) / (mu + 1.0)
    relative = radiance / law - 1
    assert np.all(np.abs(relative) < 0.02), (relative, standard_error / law)
    assert np.all(standard_error / law < 0.005)        # the check can tell 2% apart


@pytest.mark.parametrize("estimator", ["track", "march"])
@pytest.mark.parametrize("mu", [1.0, 0.5])
def test_one_bounce_is_lommel_seeliger(tmp_path, mu, estimator):
    omega = 0.9
    radiance, standard_error = half_space(tmp_path, omega, mu, 1, estimator, spp=512)
    law = omega / (4 * math.pi) / (mu + 1.0)
    z = (radiance - law) / standard_error
    assert np.all(np.abs(z) < 4), (z, radiance / law - 1)
    assert np.all(np.abs(radiance / law - 1) < 0.01)


def furnace(tmp_path, scattering, estimator, bounces):
    plume = Path(__file__).resolve().parents[2] / "sample_volumes" / "plume.nrrd"
    # a dense, white version of the plume: optical depths up to about 100 through its core
    transfer = write_transfer(tmp_path / "white.toml", [[0.0, 0.0], [0.02, 0.0], [0.3, 0.5], [1.0, 0.9]],
                              [[0.0, [1.0, 1.0, 1.0]], [1.0, [1.0, 1.0, 1.0]]])
    camera = camera_table((0.0, -125.0, 32.0), (0.0, 0.0, 30.0), 32.0, 24, 24)
    path = scene(tmp_path, plume, transfer, camera, [], {"kind": "constant", "radiance": [0.5, 0.5, 0.5]}, spp=8,
                 scattering=scattering, bounces=bounces, estimator=estimator, step_mm=0.25, phase_g=0.4)
    return tracer.render(path, seed=2)


@pytest.mark.parametrize("estimator", ["track", "march"])
@pytest.mark.parametrize("scattering", ["medium", "interface", "graded"])
def test_white_furnace_conserves_energy(tmp_path, scattering, estimator):
    frame = furnace(tmp_path, scattering, estimator, 1024)
    assert frame["alpha"].max() > 0.999                 # the medium is there, and dense
    assert np.all(np.abs(frame["radiance"] / 0.5 - 1) < 0.01)


def test_white_furnace_with_too_few_bounces_is_dark(tmp_path):
    """The furnace can fail: cut at 8 bounces the dense core loses light."""
    frame = furnace(tmp_path, "medium", "track", 8)
    assert frame["radiance"].min() < 0.45
