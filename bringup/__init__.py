"""bringup: a terminal lab notebook for bringing up high-side gate-drive circuits."""

__version__ = "0.1.0"
