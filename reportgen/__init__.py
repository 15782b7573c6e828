"""reportgen: fiber-optic link certification reports from field test results."""
from __future__ import annotations

__version__ = "0.1.0"
