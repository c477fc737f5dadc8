"""Finished answers kept by each worker, so an identical problem is answered without solving.

Why: a solve is a pure function of the problem text and of this service's configuration, and
callers repeat problems verbatim. A spreadsheet with one `GET ...?problem=...&select=...` cell
per reported value sends the same problem once per cell, and again at every recalculation; a
workflow re-runs unchanged steps; a dashboard polls. Keeping the finished answer turns each
repeat into a dictionary look-up (about the cost of /healthz) instead of validation, a solve and
a dump.

What is kept, per app (so per worker): the dumped response body without `meta`, as JSON bytes,
keyed by the solve family, the exact problem text (the POST body bytes, or the GET `problem`
parameter), whether a picture's output grid was added (`?format=png`) and, when API keys are
on, the key's label: `meta.reused` (and the time an answer takes) would otherwise tell one
caller that another asked the very same problem recently. Formats (JSON, CSV,
PNG, a selected value) are produced from the kept body at every request, and `meta` is fresh:
this request's ID, its own `elapsed_ms`, and `reused: true`. Text that differs in any byte
(spacing, key order, a number written differently) is a different key: such problems are
solved again, which is always correct.

Not kept: failures of any kind (validation, not-converged refusals, time budget), answers
larger than an eighth of the byte budget, and problems asked with `Cache-Control: no-store`.
A request with `Cache-Control: no-cache` (or `Pragma: no-cache`) is solved afresh whatever is
kept, and its answer replaces the kept one.

Bounds: least recently used entries go first beyond `ANSWER_CACHE_ENTRIES` entries or
`ANSWER_CACHE_BYTES` bytes (problem text plus body, counted exactly); `ANSWER_CACHE_BYTES = 0`
turns reuse off. Nothing is shared between workers or kept across restarts.
"""

from __future__ import annotations

import threading
from collections import OrderedDict
from typing import NamedTuple

#: Bytes counted per entry beyond its problem text and body (key tuple, dict slot, objects).
ENTRY_OVERHEAD = 200


class AnswerKey(NamedTuple):
    kind: str       # solve family
    picture: bool   # the problem was given a picture's output grid (?format=png)
    text: bytes     # the problem text exactly as sent
    client: str = ""  # the API key's label when keys are on: callers never share answers


class AnswerCache:
    """A bounded least-recently-used map from `AnswerKey` to a dumped body (JSON bytes).

    Thread-safe (one lock); counts `hits` and `misses` of `get`.
    """

    def __init__(self, max_bytes: int, max_entries: int) -> None:
        self.max_bytes = max(0, int(max_bytes))
        self.max_entries = max(0, int(max_entries))
        self._entries: OrderedDict[AnswerKey, bytes] = OrderedDict()
        self._bytes = 0
        self._lock = threading.Lock()
        self.hits = 0
        self.misses = 0

    @property
    def enabled(self) -> bool:
        return self.max_bytes > 0 and self.max_entries > 0

    @staticmethod
    def size_of(key: AnswerKey, body: bytes) -> int:
        return len(key.text) + len(key.client) + len(body) + ENTRY_OVERHEAD

    def nbytes(self) -> int:
        return self._bytes

    def __len__(self) -> int:
        return len(self._entries)

    def get(self, key: AnswerKey) -> bytes | None:
        with self._lock:
            body = self._entries.get(key)
            if body is None:
                self.misses += 1
                return None
            self._entries.move_to_end(key)
            self.hits += 1
            return body

    def put(self, key: AnswerKey, body: bytes) -> bool:
        """Keep `body` for `key` (replacing what was kept); False when it is too large to keep
        (more than an eighth of the byte budget) or reuse is off."""
        size = self.size_of(key, body)
        if not self.enabled or size * 8 > self.max_bytes:
            return False
        with self._lock:
            old = self._entries.pop(key, None)
            if old is not None:
                self._bytes -= self.size_of(key, old)
            self._entries[key] = body
            self._bytes += size
            while self._entries and (self._bytes > self.max_bytes
                                     or len(self._entries) > self.max_entries):
                gone, gone_body = self._entries.popitem(last=False)
                self._bytes -= self.size_of(gone, gone_body)
        return True

    def clear(self) -> None:
        with self._lock:
            self._entries.clear()
            self._bytes = 0
