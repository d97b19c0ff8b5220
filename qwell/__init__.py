"""qwell: quantum-well layer-stack design for device engineers."""

__version__ = "0.1.0"
