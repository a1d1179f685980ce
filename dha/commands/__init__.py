"""Command modules of the dha CLI, one per area."""
