"""Datasets: plans, items with independent noise, certified references, manifests, Dask scale-out."""

from .plan import DatasetPlan, load_plan  # noqa: F401
