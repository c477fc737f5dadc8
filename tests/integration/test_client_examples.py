"""The client examples, run against the real server (Python and shell), or checked by the URLs
and bodies they build (cell formulas, M query, Basic macro)."""

from __future__ import annotations

import csv
import json
import pathlib
import re
import subprocess
import sys

import requests

ROOT = pathlib.Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "client_examples"


def test_batch_csv_tool(server, tmp_path):
    out = tmp_path / "results.csv"
    run = subprocess.run([sys.executable, "batch_csv.py", "valve_pit_cases.csv", str(out),
                          "--url", server, "--chunk", "3"], cwd=EXAMPLES, capture_output=True,
                         text=True, timeout=120)
    assert run.returncode == 0, run.stderr
    assert "4/4" in run.stderr
    with open(out, newline="", encoding="utf-8-sig") as handle:
        rows = list(csv.DictReader(handle))
    assert [r["status"] for r in rows] == ["200", "200", "200", "422"]
    assert "conductivity" in rows[3]["error"]
    assert float(rows[0]["results.points.0.temperature"]) > 5


def test_workflow_shell_script(server):
    run = subprocess.run(["bash", "workflow.sh", "kiln_door.json",
                          "results.points.0.temperature", server], cwd=EXAMPLES,
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr
    assert 25 < float(run.stdout) < 260


def test_workflow_shell_script_fails_on_problem(server, tmp_path):
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps({"width": -1}))
    run = subprocess.run(["bash", str(EXAMPLES / "workflow.sh"), str(bad), "kind", server],
                         capture_output=True, text=True, timeout=120)
    assert run.returncode == 1 and "422" in run.stderr


def test_cell_formula_url_answers_a_number(server):
    text = (EXAMPLES / "spreadsheet_formulas.md").read_text()
    url = re.search(r"^EXAMPLE-URL: (\S+)$", text, re.M).group(1)
    url = url.replace("http://127.0.0.1:8000", server)
    assert len(url) < 2000  # cell web functions cap URLs near 2,000 characters
    response = requests.get(url, timeout=30)
    assert response.status_code == 200, response.text
    assert 20 < float(response.text) < 180


def _unquote_basic(literal: str) -> str:
    return literal.replace('""', '"')


def test_m_query_body_and_url(server):
    text = (EXAMPLES / "query.m").read_text()
    url = re.search(r'ServiceUrl = "([^"]+)"', text).group(1).replace("http://127.0.0.1:8000",
                                                                       server)
    body = _unquote_basic(re.search(r'Body = "((?:[^"]|"")*)"', text).group(1))
    response = requests.post(url, data=body, timeout=30,
                             headers={"Content-Type": "application/json", "Accept": "text/csv"})
    assert response.status_code == 200
    rows = list(csv.reader(response.content.decode("utf-8-sig").splitlines()))
    assert rows[0] == ["quantity", "value", "unit"]


def test_basic_macro_body_and_url(server):
    text = (EXAMPLES / "macro.bas").read_text()
    path = re.search(r'SERVICE_PATH As String = "([^"]+)"', text).group(1)
    template = _unquote_basic(re.search(r'PROBLEM_JSON As String = "((?:[^"]|"")*)"',
                                        text).group(1))
    body = (template.replace("{W}", "0.6").replace("{H}", "0.4").replace("{K}", "50")
            .replace("{XC}", "0.3").replace("{YC}", "0.2"))
    json.loads(body)
    response = requests.post(server + path, data=body, timeout=30,
                             headers={"Content-Type": "application/json"})
    assert response.status_code == 200, response.text
    assert 20 < float(response.text) < 85
