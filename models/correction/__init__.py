"""Correction of measured performance to reference conditions (gas turbines; ISO 3046-1 engines)."""
