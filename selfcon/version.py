"""The package version: one place, importable by every stage without importing the package's front."""
__version__ = "0.1.0"
