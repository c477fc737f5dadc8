"""Optional API keys: digests, constant-time comparison, where keys may be sent, 401 and 403."""

from __future__ import annotations

import hashlib
import hmac
import json
import urllib.parse

import pytest

from service.app import create_app
from service.ops import keys
from service.ops.keys import KeyConfigError, KeyRing, hash_key, parse_entries

KEY = "workshop-key-0123456789"
OTHER_KEY = "vessel-team-key-9876543210"
EIGEN = "/v1/eigenvalues?geometry=slab&biot=1&count=3"


def _client(**config):
    settings = {"TESTING": True, "API_KEY_HASHES": f"sheet:{hash_key(KEY)}", **config}
    return create_app(settings).test_client()


def test_hash_is_sha256_hex():
    # SHA-256 of "abc" (FIPS 180-2, appendix B.1, published test vector)
    assert hash_key("abc") == ("ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad")


def test_entries_parse_labels_comments_and_defaults():
    digest = hash_key(KEY)
    entries = parse_entries(["# accepted keys", f"sheet:{digest}  # workshop", "",
                             hash_key(OTHER_KEY).upper()], "test")
    assert entries[0] == (bytes.fromhex(digest), "sheet")
    assert entries[1][1] == "key-" + hash_key(OTHER_KEY)[:8]


def test_bad_entry_is_refused_without_repeating_it():
    with pytest.raises(KeyConfigError, match="entry 2 is not a SHA-256 digest") as info:
        parse_entries([hash_key(KEY), KEY], "CONDUCTION_API_KEY_HASHES")
    assert KEY not in str(info.value)


def test_ring_compares_every_digest_in_constant_time(monkeypatch):
    ring = KeyRing(tuple(parse_entries([f"a:{hash_key(KEY)}", f"b:{hash_key(OTHER_KEY)}"], "t")))
    calls = []
    original = hmac.compare_digest

    def spy(a, b):
        calls.append((a, b))
        return original(a, b)

    monkeypatch.setattr(keys.hmac, "compare_digest", spy)
    assert ring.identify(KEY) == "a"
    assert len(calls) == 2  # no early exit on the first match
    assert all(a == hashlib.sha256(KEY.encode()).digest() for a, _ in calls)
    assert ring.identify("guess") is None


def test_no_keys_configured_means_open():
    client = create_app({"TESTING": True}).test_client()
    assert client.get(EIGEN).status_code == 200
    # a spreadsheet template may carry a key anyway: it is ignored, not a 422 unknown field
    assert client.get(f"{EIGEN}&api_key={KEY}").status_code == 200


def test_missing_and_unknown_keys_are_401_problems():
    client = _client()
    missing = client.get(EIGEN)
    assert missing.status_code == 401
    assert missing.mimetype == "application/problem+json"
    assert missing.get_json()["type"] == "/problems/unauthorized"
    assert missing.headers["WWW-Authenticate"].startswith("Bearer")
    unknown = client.get(EIGEN, headers={"X-API-Key": OTHER_KEY})
    assert unknown.status_code == 401 and "not recognised" in unknown.get_json()["detail"]
    basic = client.get(EIGEN, headers={"Authorization": "Basic dXNlcjpwYXNz"})
    assert basic.status_code == 401 and "Bearer" in basic.get_json()["detail"]


def test_bearer_and_header_keys_are_accepted(plate_payload):
    client = _client()
    assert client.get(EIGEN, headers={"Authorization": f"Bearer {KEY}"}).status_code == 200
    assert client.get(EIGEN, headers={"Authorization": f"bearer  {KEY} "}).status_code == 200
    assert client.post("/v1/plate", json=plate_payload,
                       headers={"X-API-Key": KEY}).status_code == 200


def test_query_key_is_opt_in_and_get_only(plate_payload):
    closed = _client()
    refused = closed.get(f"{EIGEN}&api_key={KEY}")
    assert refused.status_code == 403
    assert refused.get_json()["type"] == "/problems/forbidden"
    assert "query string" in refused.get_json()["detail"]
    opened = _client(API_KEY_QUERY=True)
    assert opened.get(f"{EIGEN}&api_key={KEY}").status_code == 200
    assert opened.get(f"{EIGEN}&api_key={OTHER_KEY}").status_code == 401
    post = opened.post(f"/v1/plate?api_key={KEY}", json=plate_payload)
    assert post.status_code == 403 and "GET requests only" in post.get_json()["detail"]


def test_health_readiness_docs_and_metrics_stay_open():
    client = _client()
    for path in ("/healthz", "/readyz", "/v1/openapi.json", "/metrics"):
        assert client.get(path).status_code == 200, path
    guarded = _client(METRICS_REQUIRE_KEY=True)
    assert guarded.get("/metrics").status_code == 401
    assert guarded.get("/metrics", headers={"X-API-Key": KEY}).status_code == 200


def test_unknown_paths_need_a_key_too():
    assert _client().get("/v1/no-such-thing").status_code == 401


def test_key_file_is_read_and_reloaded(tmp_path, monkeypatch):
    monkeypatch.setattr(keys, "FILE_CHECK_INTERVAL", 0.0)
    path = tmp_path / "api-key-hashes"
    path.write_text(f"# team keys\nsheet:{hash_key(KEY)}\n")
    client = create_app({"TESTING": True, "API_KEY_FILE": str(path)}).test_client()
    assert client.get(EIGEN, headers={"X-API-Key": KEY}).status_code == 200
    assert client.get(EIGEN, headers={"X-API-Key": OTHER_KEY}).status_code == 401
    path.write_text(f"vessels:{hash_key(OTHER_KEY)}\n")  # rotate: the old key is revoked
    assert client.get(EIGEN, headers={"X-API-Key": OTHER_KEY}).status_code == 200
    assert client.get(EIGEN, headers={"X-API-Key": KEY}).status_code == 401
    path.write_text("not a digest\n")  # a broken edit keeps the last good keys
    assert client.get(EIGEN, headers={"X-API-Key": OTHER_KEY}).status_code == 200


def test_empty_key_file_fails_closed(tmp_path):
    path = tmp_path / "api-key-hashes"
    path.write_text("# nothing yet\n")
    client = create_app({"TESTING": True, "API_KEY_FILE": str(path)}).test_client()
    assert client.get(EIGEN, headers={"X-API-Key": KEY}).status_code == 401
    assert client.get("/healthz").status_code == 200


def test_missing_key_file_stops_start_up(tmp_path):
    with pytest.raises(KeyConfigError, match="CONDUCTION_API_KEY_FILE"):
        create_app({"TESTING": True, "API_KEY_FILE": str(tmp_path / "absent")})


def test_key_tool_prints_a_key_and_its_digest(capsys, monkeypatch):
    assert keys.main([]) == 0
    out = capsys.readouterr().out.splitlines()
    key = out[0].rsplit(" ", 1)[1]
    assert out[1].endswith(hash_key(key))
    monkeypatch.setattr("sys.stdin", __import__("io").StringIO(KEY + "\n"))
    assert keys.main(["--hash"]) == 0
    assert capsys.readouterr().out.strip() == hash_key(KEY)


def test_spreadsheet_cell_get_with_a_query_key(plate_payload):
    # the reason query keys exist: a cell formula can only build a URL
    query = urllib.parse.urlencode({"problem": json.dumps(plate_payload),
                                    "select": "safety.status", "api_key": KEY})
    opened = _client(API_KEY_QUERY=True)
    response = opened.get(f"/v1/plate?{query}")
    assert response.status_code == 200, response.get_data(as_text=True)
    assert response.mimetype == "text/plain"
    assert response.get_data(as_text=True) in ("ok", "warning", "exceeded", "not_checked")
    assert _client().get(f"/v1/plate?{query}").status_code == 403
