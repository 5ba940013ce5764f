"""The package version; must equal VEER_VERSION_STRING in include/veer/version.h
(tests/python/test_package.py checks it)."""
__version__ = "0.1.0"
