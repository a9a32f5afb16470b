"""flockward: a benchmark for single-drone controllers that herd bird flocks away from airfields.

Simulation only: not a flight-certified controller. Importing the package registers the Gymnasium
environment ids (see ``flockward.registration``).
"""

from flockward.registration import register_envs

__version__ = "0.1.0"

register_envs()

__all__ = ["__version__", "register_envs"]
