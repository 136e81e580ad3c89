"""Sequences for temporal denoisers: camera paths (:mod:`.path`), the frames' camera matrices and motion
vectors (:mod:`.motion`), and rendering a sequence frame by frame (:mod:`.render`)."""
