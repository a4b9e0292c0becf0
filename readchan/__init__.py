"""readchan: decode, diagnose and synthesize magnetic read-channel captures."""

__version__ = "0.1.0"
