"""Outside references for the renderer: closed forms, quadratures and a slow oracle, written from the README.

Nothing in this package imports ``tracer`` (tests/test_layout.py checks it): it reads scene, transfer-function,
NRRD and EXR files itself, builds its own camera rays from the README's conventions, and takes every constant the
README defines from the README's text (:mod:`.readme`), so a shared misreading of the model would have to be
made twice, independently, to pass.
"""
