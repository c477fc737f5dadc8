"""The solver layer must not pull in the web or schema layers."""

from __future__ import annotations

import pathlib
import subprocess
import sys

ROOT = pathlib.Path(__file__).resolve().parents[1]


def test_solvers_do_not_import_flask_or_marshmallow():
    code = (
        "import importlib, pkgutil, sys\n"
        "import service.solvers as s\n"
        "for m in pkgutil.iter_modules(s.__path__):\n"
        "    importlib.import_module('service.solvers.' + m.name)\n"
        "bad = [n for n in ('flask', 'marshmallow', 'pint', 'werkzeug') if n in sys.modules]\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "", f"solvers imported {out.stdout.strip()}"
