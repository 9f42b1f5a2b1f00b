"""Figures (object-oriented matplotlib only; no pyplot state)."""
