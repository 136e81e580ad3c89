"""File formats: NRRD/NPY in, NPZ/EXR/PNG out, TOML configuration. Arrays and metadata cross this line."""
