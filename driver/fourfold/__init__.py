"""fourfold: tetrahedral or square planar, and in which spin state."""

__version__ = "0.1.0"
