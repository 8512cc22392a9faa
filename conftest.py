"""Test configuration: the tests import seepfe from this checkout, whatever else is installed."""
