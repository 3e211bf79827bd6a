"""The package version (one place, read by the build and by ``thermoelec --version``)."""

__version__ = "0.1.0"
