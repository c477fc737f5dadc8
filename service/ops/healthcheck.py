"""Container health check: `python -m service.ops.healthcheck` exits 0 when GET /healthz answers
200 on the address gunicorn binds (CONDUCTION_BIND), else 1.

Standard library only and no service imports beyond this package, so it starts in a few tens
of milliseconds; it follows CONDUCTION_BIND, so changing the port never breaks the HEALTHCHECK.
"""

from __future__ import annotations

import os
import sys
import urllib.error
import urllib.request

DEFAULT_BIND = "127.0.0.1:8000"
#: Below the Dockerfile's HEALTHCHECK --timeout, so a slow answer is reported, not killed.
TIMEOUT_SECONDS = 3.0


def health_url(bind: str) -> str:
    """The /healthz URL for a gunicorn bind address such as `0.0.0.0:8000` or `[::]:8000`."""
    bind = bind.split(",")[0].strip()
    if bind.startswith("unix:"):
        raise ValueError("a unix-socket bind cannot be checked over TCP")
    host, _, port = bind.rpartition(":")
    if not host or not port.isdigit():
        host, port = bind or "127.0.0.1", "8000"
    if host in ("0.0.0.0", "", "*"):
        host = "127.0.0.1"
    elif host in ("[::]", "::"):
        host = "[::1]"
    return f"http://{host}:{port}/healthz"


def main() -> int:
    url = health_url(os.environ.get("CONDUCTION_BIND", DEFAULT_BIND))
    try:
        with urllib.request.urlopen(url, timeout=TIMEOUT_SECONDS) as response:  # noqa: S310
            return 0 if response.status == 200 else 1
    except (urllib.error.URLError, OSError) as exc:
        print(f"health check of {url} failed: {exc}", file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())
