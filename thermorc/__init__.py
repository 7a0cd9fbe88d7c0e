"""
thermorc: resistor-capacitor thermal models of homes, calibrated from thermostat logs.

The stages, one module each, in the order data flows through them:
``read`` -> ``align`` -> ``network`` -> ``simulate`` -> ``estimate`` -> ``diagnose`` ->
``forecast`` / ``report``. See DEVELOPERS.md for the file map.
"""

from importlib.metadata import PackageNotFoundError, version as _version

try:
    __version__ = _version("thermorc")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0.0.0+unknown"

from thermorc.errors import InputError, NetworkError, ThermorcWarning  # noqa: E402

__all__ = ["__version__", "InputError", "NetworkError", "ThermorcWarning"]
