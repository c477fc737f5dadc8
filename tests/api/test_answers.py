"""Answers reused for identical problems (service/api/answers.py)."""

from __future__ import annotations

import json
import urllib.parse

import pytest
from prometheus_client.parser import text_string_to_metric_families

from service.api.answers import ENTRY_OVERHEAD, AnswerCache, AnswerKey
from service.app import create_app
from service.ops.keys import hash_key


@pytest.fixture
def fresh():
    """An app of its own, so nothing is kept from other tests."""
    app = create_app({"TESTING": True})
    return app, app.test_client()


def _post(client, text: str, **headers: str):
    return client.post("/v1/plate", data=text, content_type="application/json",
                       headers=headers)


def _without_meta(body: dict) -> dict:
    return {k: v for k, v in body.items() if k != "meta"}


# --------------------------------------------------------------------------- the cache alone


def _key(text: str) -> AnswerKey:
    return AnswerKey("plate", False, text.encode())


def test_cache_keeps_the_most_recently_used_entries():
    cache = AnswerCache(max_bytes=10**6, max_entries=2)
    cache.put(_key("a"), b"{1}")
    cache.put(_key("b"), b"{2}")
    assert cache.get(_key("a")) == b"{1}"  # a is now the most recent
    cache.put(_key("c"), b"{3}")
    assert cache.get(_key("b")) is None
    assert cache.get(_key("a")) == b"{1}" and cache.get(_key("c")) == b"{3}"
    assert (cache.hits, cache.misses) == (3, 1)


def test_cache_counts_bytes_exactly_and_stays_within_them():
    body = b"x" * 1000
    size = len("k0") + len(body) + ENTRY_OVERHEAD
    cache = AnswerCache(max_bytes=8 * size, max_entries=100)
    for i in range(10):
        assert cache.put(_key(f"k{i}"), body)
    assert len(cache) == 8 and cache.nbytes() == 8 * size
    assert cache.get(_key("k1")) is None and cache.get(_key("k9")) == body
    # replacing an entry counts the new body, not both
    cache.put(_key("k9"), b"y" * 10)
    assert cache.nbytes() == 7 * size + len("k9") + 10 + ENTRY_OVERHEAD
    cache.clear()
    assert len(cache) == 0 and cache.nbytes() == 0


def test_cache_refuses_answers_over_an_eighth_of_its_bytes_and_can_be_off():
    cache = AnswerCache(max_bytes=8000, max_entries=10)
    assert not cache.put(_key("big"), b"x" * 1000)
    assert cache.put(_key("small"), b"x" * 700)
    off = AnswerCache(max_bytes=0, max_entries=10)
    assert not off.enabled and not off.put(_key("a"), b"{}") and len(off) == 0


# --------------------------------------------------------------------------- through the app


def test_an_identical_problem_is_answered_from_the_kept_answer(fresh, plate_payload):
    app, client = fresh
    text = json.dumps(plate_payload)
    first = _post(client, text, **{"X-Request-ID": "first"})
    second = _post(client, text, **{"X-Request-ID": "second"})
    assert first.status_code == second.status_code == 200
    a, b = first.get_json(), second.get_json()
    assert a["meta"]["reused"] is False and b["meta"]["reused"] is True
    assert b["meta"]["request_id"] == "second" and b["meta"]["elapsed_ms"] >= 0
    assert set(b["meta"]) == set(a["meta"])
    assert _without_meta(a) == _without_meta(b)
    # meta stays the last key, as in the response schema
    assert list(b) == list(a) and list(b)[-1] == "meta"
    assert len(app.extensions["conduction"]["answers"]) == 1


def test_problems_that_differ_in_any_byte_are_solved_again(fresh, plate_payload):
    _, client = fresh
    first = _post(client, json.dumps(plate_payload)).get_json()
    spaced = _post(client, json.dumps(plate_payload, indent=1)).get_json()
    assert spaced["meta"]["reused"] is False
    assert _without_meta(spaced) == _without_meta(first)
    other = dict(plate_payload, conductivity=53)
    assert _post(client, json.dumps(other)).get_json()["meta"]["reused"] is False


def test_no_cache_solves_afresh_and_no_store_keeps_nothing(fresh, plate_payload):
    app, client = fresh
    text = json.dumps(plate_payload)
    _post(client, text)
    assert _post(client, text, **{"Cache-Control": "no-cache"}).get_json()["meta"][
        "reused"] is False
    assert _post(client, text, Pragma="no-cache").get_json()["meta"]["reused"] is False
    assert _post(client, text).get_json()["meta"]["reused"] is True
    other = json.dumps(dict(plate_payload, conductivity=53))
    assert _post(client, other, **{"Cache-Control": "no-store"}).get_json()["meta"][
        "reused"] is False
    assert _post(client, other).get_json()["meta"]["reused"] is False
    assert len(app.extensions["conduction"]["answers"]) == 2


def test_the_content_type_is_checked_before_a_kept_answer_is_used(fresh, plate_payload):
    _, client = fresh
    text = json.dumps(plate_payload)
    _post(client, text)
    refused = client.post("/v1/plate", data=text, content_type="application/x-www-form-urlencoded")
    assert refused.status_code == 415
    assert refused.get_json()["type"] == "/problems/unsupported-media-type"


def test_failures_are_not_kept(fresh, plate_payload):
    app, client = fresh
    bad = json.dumps(dict(plate_payload, conductivity=-1))
    for _ in range(2):
        response = _post(client, bad)
        assert response.status_code == 422
        assert response.get_json()["type"] == "/problems/validation-failed"
    assert len(app.extensions["conduction"]["answers"]) == 0


def test_spreadsheet_cells_selecting_values_of_one_problem_share_its_answer(fresh,
                                                                               plate_payload):
    _, client = fresh
    problem = urllib.parse.quote(json.dumps(plate_payload))
    full = client.get(f"/v1/plate?problem={problem}").get_json()
    assert full["meta"]["reused"] is False
    for i in range(2):
        cell = client.get(f"/v1/plate?problem={problem}&select=results.points.{i}.temperature")
        assert cell.status_code == 200 and cell.mimetype == "text/plain"
        # the same value the full answer reports (both come from one solve)
        assert float(cell.get_data(as_text=True)) == full["results"]["points"][i]["temperature"]
    meta = client.get(f"/v1/plate?problem={problem}&select=meta.reused")
    assert meta.get_data(as_text=True) == "TRUE"


def test_csv_and_png_are_made_from_the_kept_answer(fresh, plate_payload):
    _, client = fresh
    text = json.dumps(plate_payload)
    first_csv = client.post("/v1/plate?format=csv", data=text, content_type="application/json")
    second_csv = client.post("/v1/plate?format=csv", data=text, content_type="application/json")
    assert first_csv.mimetype == second_csv.mimetype == "text/csv"
    rows = [r for r in second_csv.get_data(as_text=True).splitlines()
            if not r.startswith("meta.")]
    assert rows == [r for r in first_csv.get_data(as_text=True).splitlines()
                    if not r.startswith("meta.")]
    assert "meta.reused,TRUE" in second_csv.get_data(as_text=True)
    # a picture asks for an output grid: kept apart from the plain answer
    no_grid = json.dumps({k: v for k, v in plate_payload.items() if k != "grid"})
    _post(client, no_grid)
    for _ in range(2):
        png = client.post("/v1/plate?format=png", data=no_grid,
                          content_type="application/json")
        assert png.status_code == 200 and png.mimetype == "image/png"
        assert png.data[:8] == b"\x89PNG\r\n\x1a\n"
    again = _post(client, no_grid).get_json()
    assert again["meta"]["reused"] is True and again["results"]["grid"] is None


def test_reuse_can_be_turned_off(plate_payload):
    client = create_app({"TESTING": True, "ANSWER_CACHE_BYTES": 0}).test_client()
    text = json.dumps(plate_payload)
    for _ in range(2):
        assert _post(client, text).get_json()["meta"]["reused"] is False


def test_reused_and_computed_answers_are_counted(fresh, plate_payload):
    _, client = fresh

    def count(result: str) -> float:
        text = client.get("/metrics").get_data(as_text=True)
        for family in text_string_to_metric_families(text):
            for sample in family.samples:
                if (sample.name == "conduction_answers_total"
                        and sample.labels == {"family": "plate", "result": result}):
                    return sample.value
        return 0.0

    before = count("reused"), count("computed")
    text = json.dumps(dict(plate_payload, conductivity=41.5))
    for _ in range(3):
        _post(client, text)
    assert (count("reused") - before[0], count("computed") - before[1]) == (2, 1)


def test_callers_with_different_api_keys_never_share_an_answer(plate_payload):
    keys = {"sheet": "first-" + "a" * 20, "plm": "second-" + "b" * 20}
    app = create_app({"TESTING": True, "API_KEY_HASHES": ",".join(
        f"{label}:{hash_key(key)}" for label, key in keys.items())})
    client = app.test_client()
    text = json.dumps(plate_payload)

    def reused(key: str) -> bool:
        response = _post(client, text, **{"X-API-Key": key})
        assert response.status_code == 200
        return response.get_json()["meta"]["reused"]

    # the second caller cannot learn that the first asked this problem
    assert [reused(keys["sheet"]), reused(keys["plm"]), reused(keys["sheet"]),
            reused(keys["plm"])] == [False, False, True, True]
