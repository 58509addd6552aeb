"""Shared pytest configuration for brayscope's tests (helpers may append fixtures here)."""

from __future__ import annotations
