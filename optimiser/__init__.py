"""afpm: design an axial-flux permanent-magnet alternator for a sailing boat's propeller shaft."""

__version__ = "0.1.0"
"""Kept equal to pyproject.toml's version (tests/test_cli_small.py checks it)."""
