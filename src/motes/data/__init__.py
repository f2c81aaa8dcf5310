"""Data files bundled with motes (read with importlib.resources).

``dwarf_sequence.txt``: the mean dwarf sequence of :mod:`motes.companion.sequence`.
"""

__all__: list[str] = []
