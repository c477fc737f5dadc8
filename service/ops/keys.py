"""Optional API keys.

Keys are never stored: the service holds SHA-256 digests of them, from
CONDUCTION_API_KEY_HASHES (comma- or newline-separated) and/or the file named by
CONDUCTION_API_KEY_FILE (one per line, `#` comments; a mounted Kubernetes Secret is re-read
when it changes). An entry is 64 hexadecimal digits, optionally preceded by a label and a colon
(`workshop-sheet:9f86d0...`); the label, or `key-` and the digest's first 8 digits, names the
caller in the request log. Configuring either variable turns the check on, even with no entry
(then every protected request is refused: fail closed).

A caller sends its key as `Authorization: Bearer <key>` or `X-API-Key: <key>`, or, only when
CONDUCTION_API_KEY_QUERY is on and only on GET requests (spreadsheet cells can send nothing
else), as the query parameter `api_key`. The presented key is hashed and compared with every
configured digest by `hmac.compare_digest`, with no early exit, so the time taken does not
depend on which digest matches or how much of it does.

Answers: 401 `/problems/unauthorized` when no key or an unknown key is sent (with a
`WWW-Authenticate: Bearer` header); 403 `/problems/forbidden` when a key is sent in the query
string and that is not allowed here (off, or not a GET). Always open: /healthz, /readyz, the
OpenAPI document and the docs page (nothing computed, nothing secret), and /metrics unless
CONDUCTION_METRICS_REQUIRE_KEY is on.

`python -m service.ops.keys` prints a new random key and the digest to configure;
`python -m service.ops.keys --hash < keyfile` prints the digest of an existing key.
"""

from __future__ import annotations

import argparse
import hashlib
import hmac
import logging
import os
import re
import secrets
import sys
import threading
import time
from collections.abc import Iterable
from dataclasses import dataclass
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from flask import Flask

log = logging.getLogger("service.keys")

OPEN_PATHS = frozenset({"/healthz", "/readyz", "/v1/openapi.json", "/v1/docs"})
METRICS_PATH = "/metrics"
QUERY_PARAMETER = "api_key"
QUERY_METHODS = frozenset({"GET", "HEAD"})
#: How often a key file is checked for changes, s.
FILE_CHECK_INTERVAL = 2.0

_ENTRY = re.compile(r"^(?:(?P<label>[A-Za-z0-9_.-]{1,64}):)?(?P<digest>[0-9A-Fa-f]{64})$")


class KeyConfigError(ValueError):
    """A configured digest is malformed (the message never repeats the entry itself)."""


@dataclass(frozen=True)
class KeyRing:
    """SHA-256 digests of the accepted keys, each with a label for the logs."""

    entries: tuple[tuple[bytes, str], ...]

    def identify(self, presented: str) -> str | None:
        """The label of `presented` if it is an accepted key, else None (constant time)."""
        candidate = hashlib.sha256(presented.encode("utf-8")).digest()
        found: str | None = None
        for digest, label in self.entries:
            if hmac.compare_digest(candidate, digest):
                found = label
        return found


def hash_key(key: str) -> str:
    """The hex SHA-256 digest to configure for `key`."""
    return hashlib.sha256(key.encode("utf-8")).hexdigest()


def parse_entries(lines: Iterable[str], source: str) -> list[tuple[bytes, str]]:
    """Digests and labels from configuration lines; raises KeyConfigError naming the entry."""
    out: list[tuple[bytes, str]] = []
    for number, raw in enumerate(lines, start=1):
        text = raw.split("#", 1)[0].strip()
        if not text:
            continue
        match = _ENTRY.match(text)
        if match is None:
            raise KeyConfigError(
                f"{source}: entry {number} is not a SHA-256 digest (64 hexadecimal digits, "
                "optionally preceded by 'label:'). Configure digests, never the keys themselves: "
                "python -m service.ops.keys --hash")
        digest = match["digest"].lower()
        out.append((bytes.fromhex(digest), match["label"] or f"key-{digest[:8]}"))
    return out


class KeyStore:
    """The accepted keys: fixed ones from the environment plus a file re-read on change."""

    def __init__(self, hashes: str, path: str) -> None:
        self.enabled = bool(hashes.strip() or path)
        self._fixed = parse_entries(re.split(r"[,\n]", hashes), "CONDUCTION_API_KEY_HASHES")
        self._path = path
        self._signature: tuple[int, int, int] | None = None
        self._checked = 0.0
        self._lock = threading.Lock()
        self._ring = KeyRing(tuple(self._fixed))
        if path:
            self._reload(initial=True)

    def ring(self) -> KeyRing:
        if self._path and time.monotonic() - self._checked > FILE_CHECK_INTERVAL:
            with self._lock:
                self._reload(initial=False)
        return self._ring

    def _reload(self, *, initial: bool) -> None:
        self._checked = time.monotonic()
        try:
            stat = os.stat(self._path)
            signature = (stat.st_mtime_ns, stat.st_size, stat.st_ino)
            if signature == self._signature:
                return
            with open(self._path, encoding="utf-8") as handle:
                entries = parse_entries(handle, "CONDUCTION_API_KEY_FILE")
        except (OSError, KeyConfigError) as exc:
            if initial:
                raise KeyConfigError(f"CONDUCTION_API_KEY_FILE cannot be used: {exc}") from exc
            log.error("API key file not reloaded, keeping the previous keys: %s", exc)
            return
        self._signature = signature
        self._ring = KeyRing(tuple(self._fixed + entries))
        if not initial:
            log.info("API key file reloaded: %d file entries", len(entries))


def install(app: Flask) -> None:
    """Refuse protected requests without an accepted key (only when keys are configured)."""
    from flask import g, request
    from werkzeug.datastructures import ImmutableMultiDict

    store = KeyStore(str(app.config["API_KEY_HASHES"]), str(app.config["API_KEY_FILE"]))
    app.extensions.setdefault("conduction", {})["api_keys"] = store

    def _strip_query_key() -> None:
        """Hide `api_key` from the views: query schemas reject unknown parameters, and a
        spreadsheet template may carry the key whether or not this deployment checks it."""
        if request.query_string and QUERY_PARAMETER in request.args:
            request.args = ImmutableMultiDict(  # type: ignore[misc]
                [(k, v) for k, v in request.args.items(multi=True) if k != QUERY_PARAMETER])

    if not store.enabled:
        app.before_request(_strip_query_key)
        return

    from service.ops.metrics import AUTH_FAILURES
    from service.problems import ProblemError

    allow_query = bool(app.config["API_KEY_QUERY"])
    open_paths = set(OPEN_PATHS)
    if not app.config["METRICS_REQUIRE_KEY"]:
        open_paths.add(METRICS_PATH)
    challenge = 'Bearer realm="conduction"'

    def refuse(reason: str, type_: str, detail: str, headers: dict[str, str] | None = None
               ) -> ProblemError:
        AUTH_FAILURES.labels(reason).inc()
        return ProblemError(type_, detail, headers=headers)

    @app.before_request
    def _check_key() -> None:
        if request.path in open_paths or request.method == "OPTIONS":
            return
        presented = None
        authorization = request.headers.get("Authorization", "")
        if authorization:
            scheme, _, token = authorization.partition(" ")
            if scheme.lower() != "bearer" or not token.strip():
                raise refuse("bad_scheme", "/problems/unauthorized",
                             "Send the API key as 'Authorization: Bearer <key>' or "
                             "'X-API-Key: <key>'.", {"WWW-Authenticate": challenge})
            presented = token.strip()
        elif request.headers.get("X-API-Key"):
            presented = request.headers["X-API-Key"].strip()
        elif request.query_string and QUERY_PARAMETER in request.args:
            if not allow_query or request.method not in QUERY_METHODS:
                where = ("on GET requests only" if allow_query
                         else "by this deployment")
                raise refuse("query_not_allowed", "/problems/forbidden",
                             f"API keys in the query string are not accepted {where}; send "
                             "the key in the Authorization or X-API-Key header. A key sent in "
                             "a URL may have been recorded on its way: consider replacing it.")
            presented = request.args[QUERY_PARAMETER]
        if not presented:
            raise refuse("missing", "/problems/unauthorized",
                         "This deployment requires an API key: send 'Authorization: Bearer "
                         "<key>' or 'X-API-Key: <key>'.", {"WWW-Authenticate": challenge})
        label = store.ring().identify(presented)
        if label is None:
            raise refuse("unknown", "/problems/unauthorized", "The API key is not recognised.",
                         {"WWW-Authenticate": challenge + ', error="invalid_token"'})
        g.api_client = label
        _strip_query_key()


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="python -m service.ops.keys",
        description="Make an API key and the SHA-256 digest to configure for it.")
    parser.add_argument("--hash", action="store_true",
                        help="read an existing key from standard input and print its digest")
    args = parser.parse_args(argv)
    if args.hash:
        key = sys.stdin.readline().strip()
        if not key:
            parser.error("no key on standard input")
        print(hash_key(key))
        return 0
    key = secrets.token_urlsafe(32)
    print(f"key (give to the caller, store nowhere else): {key}")
    print(f"digest (CONDUCTION_API_KEY_HASHES or the key file): {hash_key(key)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
