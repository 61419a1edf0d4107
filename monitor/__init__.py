"""ejecta: live and post-run monitor for cold-gas thruster stands and gas-jet hovering platforms."""

__version__ = "0.1.0"
