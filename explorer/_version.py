"""The kit's version, in one place that every layer may read."""

__version__ = "0.1.0"
