"""fourfold: tetrahedral or square planar, and in which spin state."""

__version__ = "0.2.0"
