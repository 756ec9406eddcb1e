"""podwatch receiver: decode, recompute and compare a robot's odometry."""

__version__ = "0.1.0"
