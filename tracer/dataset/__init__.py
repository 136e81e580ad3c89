"""Datasets: plans, items with independent noise, certified references, manifests, Dask scale-out."""

from .plan import DatasetPlan, load_plan

__all__ = ["DatasetPlan", "load_plan"]
