"""JSON in and out: orjson, numpy-aware, and unable to write NaN or Infinity.

orjson writes NaN and infinities as null (JSON has no such values) and rejects them on input,
so neither direction can produce or accept non-JSON numbers.
"""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np
import orjson
from flask import Response
from flask.json.provider import JSONProvider

_OPTIONS = orjson.OPT_SERIALIZE_NUMPY | orjson.OPT_NON_STR_KEYS


def _default(value: Any) -> Any:
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, np.ndarray):
        return value.tolist()
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return dataclasses.asdict(value)
    if isinstance(value, tuple | set | frozenset):
        return list(value)
    raise TypeError(f"cannot write {type(value).__name__} as JSON")


def dumps_bytes(obj: Any) -> bytes:
    return orjson.dumps(obj, default=_default, option=_OPTIONS)


def loads(data: str | bytes) -> Any:
    """Strict JSON: rejects NaN, Infinity, trailing garbage; raises orjson.JSONDecodeError."""
    return orjson.loads(data)


class OrjsonProvider(JSONProvider):
    mimetype = "application/json"

    def dumps(self, obj: Any, **kwargs: Any) -> str:
        return dumps_bytes(obj).decode()

    def loads(self, s: str | bytes, **kwargs: Any) -> Any:
        return loads(s)

    def response(self, *args: Any, **kwargs: Any) -> Response:
        obj = self._prepare_response_obj(args, kwargs)
        return Response(dumps_bytes(obj), mimetype=self.mimetype)
