"""Reciprocating engine sets: forward model and reconstruction shared by their unit types."""
