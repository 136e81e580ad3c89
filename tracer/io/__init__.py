"""Helpers every file reader and writer shares: write-then-rename (``atomic.py``) and typed TOML tables with one-line errors (``tomlfile.py``)."""
