"""benchgate: an automated bench test runner for analog electronics."""

__version__ = "0.1.0"
