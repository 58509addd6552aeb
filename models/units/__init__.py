"""Unit types: the interface (base), the shipped types by name (registry), one package each."""
