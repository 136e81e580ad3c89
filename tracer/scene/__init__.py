"""The scene: what is rendered and how: volume and transfer function, camera, lights, environment, settings.

``model.py`` holds the frozen dataclasses (:class:`Scene`, :class:`RenderSettings`, :class:`Light`,
:class:`Environment`); ``camera.py`` the pinhole camera; ``parse.py`` reads a scene TOML file
(format in the README) with one-line errors.
"""

from .camera import Camera
from .model import ENVIRONMENTS, LIGHT_KINDS, SCATTERINGS, Environment, Light, RenderSettings, Scene, ViewWarning
from .parse import load_scene, parse_scene

__all__ = ["Scene", "RenderSettings", "Light", "Environment", "Camera", "ViewWarning", "load_scene", "parse_scene",
           "SCATTERINGS", "ENVIRONMENTS", "LIGHT_KINDS"]
