"""motes: photometric typing of faint companions and dust-mixture fits of debris-disk colours."""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["__version__"]
