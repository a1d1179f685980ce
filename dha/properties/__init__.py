"""Calculated properties: one module per property family."""
