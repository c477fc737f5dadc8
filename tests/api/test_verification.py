"""The verification report runs and every published case passes."""

from __future__ import annotations

from service.verification import CASES


def test_every_published_case_passes(client):
    body = client.get("/v1/verification").get_json()
    failed = [c for c in body["cases"] if not c["passed"]]
    assert not failed, failed
    assert body["summary"]["cases"] == len(CASES) >= 13
    for case in body["cases"]:
        assert case["source"] and case["computed"] is not None


def test_verification_csv(client):
    response = client.get("/v1/verification?format=csv")
    lines = response.get_data(as_text=True).splitlines()
    assert lines[0] == "\ufeffcase,published,computed,tolerance,result,unit,source"
    assert all(",pass," in line for line in lines[1:])


def test_a_wrong_published_value_fails_the_case(app):
    # the report can fail: perturb one published value beyond its tolerance
    import dataclasses

    from service.api.verification import solve_case
    from service.verification import run_cases

    wrong = dataclasses.replace(CASES[0], published=CASES[0].published + 10 * CASES[0].atol)
    with app.test_request_context():
        (outcome,) = run_cases(solve_case, [wrong])
    assert not outcome.passed and outcome.note == "outside tolerance"
