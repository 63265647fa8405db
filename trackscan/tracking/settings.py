"""Settings of scan tracking (defined with the other settings in :mod:`trackscan.settings`)."""

from trackscan.settings import TrackingSettings

__all__ = ["TrackingSettings"]
