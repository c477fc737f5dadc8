"""HTTP layer: one blueprint per family, plus meta endpoints (health, docs, eigenvalues)."""

from __future__ import annotations

from flask import Blueprint


def blueprints() -> list[Blueprint]:
    """Every blueprint of the service; importing them registers the solve families."""
    from service.api import batch, fin, grid, layers, meta, plate, transient, verification

    return [meta.bp, plate.bp, transient.bp, layers.bp, fin.bp, grid.bp, batch.bp,
            verification.bp]
