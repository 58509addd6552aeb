"""Ideal comparison cycles (air-standard and variable-property)."""
