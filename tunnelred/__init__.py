"""tunnelred: reduce wind-tunnel data from rotating-cylinder tests."""

__version__ = "0.1.0.dev0"
