"""upshot: learn the incremental effect of a contact and decide whom to contact."""

from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["__version__"]
