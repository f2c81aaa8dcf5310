"""Data files bundled with motes (read with importlib.resources)."""
