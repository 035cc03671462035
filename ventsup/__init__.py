"""ventsup: a supervisory controller for motorised operable windows.

It decides, per zone and at every tick or alarm, whether openings should be
open, closed or part-open and why (life safety, protection, faults, operator
overrides, schedule, comfort and free cooling, actuator care), tells the HVAC
plant, and keeps a record of the free cooling it delivered.
"""

from importlib.metadata import PackageNotFoundError, version

try:
    __version__ = version("ventsup")
except PackageNotFoundError:  # running from a source tree without installing
    __version__ = "0.0.0+unknown"

__all__ = ["__version__"]
