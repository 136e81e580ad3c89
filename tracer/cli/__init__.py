"""The command line: a thin layer over the Python API, one small Typer module per command group.

``main.py`` mounts the commands of ``volumes.py`` (info, tf-check, demo-volumes), ``rendering.py``
(preview, render, pool), ``datasets.py`` (dataset, dataset-sheet) and ``scoring.py`` (score,
score-dataset, denoise); ``common.py`` turns a :class:`tracer.UserError` into one line and exit 2.
"""
