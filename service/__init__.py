"""Conduction service: heat-conduction calculations over a JSON HTTP API."""

from __future__ import annotations

__version__ = "0.1.0"
