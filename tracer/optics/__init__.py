"""Optics: transfer functions (value -> albedo and opacity), their baking into lookup tables, and the check.

``transfer.py`` parses and validates a transfer function and bakes it into the extinction and
albedo tables the kernels read (opacity correction, Engel et al. 2006); ``check.py`` is
``tracer tf-check``: how much of a volume a function makes visible, and the report picture.
"""

from .check import TransferCheck, check_transfer_function, plot_transfer_check
from .transfer import TransferFunction, load_transfer_function, parse_transfer_function

__all__ = ["TransferFunction", "load_transfer_function", "parse_transfer_function", "TransferCheck",
           "check_transfer_function", "plot_transfer_check"]
