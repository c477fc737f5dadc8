"""deploy/gunicorn.conf.py: settings, the drain-on-SIGTERM hooks and the runtime directory."""

from __future__ import annotations

import importlib
import logging
import os
import pathlib
import runpy
import time
import types

import gunicorn.config
import pytest

from service.config import DEFAULTS
from service.ops.logs import JsonFormatter

ROOT = pathlib.Path(__file__).resolve().parents[2]
CONF = ROOT / "deploy" / "gunicorn.conf.py"
HELPERS = {"available_cpus", "drain_seconds"}


def load_conf(monkeypatch, **env: str) -> dict:
    for var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS",
                "NUMEXPR_NUM_THREADS", "CONDUCTION_WORKERS", "CONDUCTION_DRAIN_SECONDS",
                "CONDUCTION_ACCESS_LOG", "CONDUCTION_LOG_FORMAT", "PROMETHEUS_MULTIPROC_DIR",
                "CONDUCTION_METRICS_DIR", "CONDUCTION_DRAIN_FILE"):
        monkeypatch.delenv(var, raising=False)
    for key, value in env.items():
        monkeypatch.setenv(key, value)
    return runpy.run_path(str(CONF))


class FakeArbiter:
    """The parts of gunicorn's Arbiter the hooks touch."""

    def __init__(self) -> None:
        self.log = logging.getLogger("test.arbiter")
        self.stopped = 0
        self.managed = 0

    def handle_term(self) -> None:
        self.stopped += 1
        raise StopIteration

    def manage_workers(self) -> None:
        self.managed += 1


def test_every_name_is_a_gunicorn_setting(monkeypatch):
    conf = load_conf(monkeypatch)
    known = set(gunicorn.config.Config().settings)
    names = {n for n, v in conf.items() if not n.startswith("_")
             and not isinstance(v, types.ModuleType) and n not in HELPERS
             and n not in ("annotations", "Any")}
    assert names - known == set(), "misspelt settings are ignored by gunicorn"


def test_settings_fit_the_time_budget_and_the_platform(monkeypatch):
    conf = load_conf(monkeypatch)
    budget = DEFAULTS["TIME_BUDGET_SECONDS"]
    # sync handling behind a request buffer (service/ops/worker.py): one request at a time,
    # on the main thread, as the time budget needs
    assert conf["worker_class"] == "service.ops.worker.RequestBufferingWorker"
    assert conf["timeout"] >= 2 * budget  # the hard backstop stays behind the soft budget
    assert conf["graceful_timeout"] >= budget  # an in-flight request may finish
    assert conf["workers"] == conf["available_cpus"]() >= 1
    assert conf["limit_request_line"] >= 16384  # spreadsheet GETs carry the problem
    assert conf["control_socket_disable"] is True and conf["preload_app"] is False
    assert conf["drain_seconds"] == 0  # local runs and tests stop at once
    assert os.environ["OPENBLAS_NUM_THREADS"] == "1"
    if os.access("/dev/shm", os.W_OK):
        assert conf["worker_tmp_dir"] == "/dev/shm"


def test_environment_overrides(monkeypatch):
    conf = load_conf(monkeypatch, CONDUCTION_WORKERS="5", CONDUCTION_DRAIN_SECONDS="7.5",
                     CONDUCTION_ACCESS_LOG="-")
    assert conf["workers"] == 5 and conf["drain_seconds"] == 7.5
    assert conf["accesslog"] == "-"
    assert conf["logconfig_dict"]["loggers"]["gunicorn.access"]["handlers"] == ["access"]


def test_logs_are_json_and_access_lines_carry_no_query_string(monkeypatch):
    conf = load_conf(monkeypatch)
    assert conf["accesslog"] is None  # the service logs each request itself
    fmt = conf["access_log_format"]
    assert "%(U)s" in fmt and "%(r)s" not in fmt and "%(q)s" not in fmt
    logconfig = conf["logconfig_dict"]
    module, _, name = logconfig["formatters"]["json"]["()"].rpartition(".")
    assert getattr(importlib.import_module(module), name) is JsonFormatter
    assert logconfig["loggers"]["gunicorn.access"]["level"] == "CRITICAL"
    assert load_conf(monkeypatch, CONDUCTION_LOG_FORMAT="text")["logconfig_dict"] is None


def test_available_cpus_is_within_the_machine(monkeypatch):
    cpus = load_conf(monkeypatch)["available_cpus"]()
    assert 1 <= cpus <= (os.cpu_count() or 1)


def test_runtime_directory_and_stale_samples(monkeypatch, tmp_path):
    metrics_dir = tmp_path / "metrics"
    metrics_dir.mkdir()
    (metrics_dir / "counter_4242.db").write_bytes(b"stale")
    conf = load_conf(monkeypatch, CONDUCTION_METRICS_DIR=str(metrics_dir))
    conf["on_starting"](FakeArbiter())
    assert os.environ["PROMETHEUS_MULTIPROC_DIR"] == str(metrics_dir)
    assert list(metrics_dir.iterdir()) == []
    marker = pathlib.Path(os.environ["CONDUCTION_DRAIN_FILE"])
    assert marker.parent.is_dir() and not marker.exists()
    (metrics_dir / "gauge_livesum_4242.db").write_bytes(b"x")
    (metrics_dir / "counter_4242.db").write_bytes(b"x")
    conf["child_exit"](FakeArbiter(), types.SimpleNamespace(pid=4242))
    assert sorted(p.name for p in metrics_dir.iterdir()) == ["counter_4242.db"]  # counts stay
    conf["on_exit"](FakeArbiter())
    assert not marker.parent.exists()


def test_fresh_metrics_directory_when_none_is_given(monkeypatch):
    conf = load_conf(monkeypatch)
    conf["on_starting"](FakeArbiter())
    metrics_dir = pathlib.Path(os.environ["PROMETHEUS_MULTIPROC_DIR"])
    assert metrics_dir.is_dir()
    assert metrics_dir.parent == pathlib.Path(os.environ["CONDUCTION_DRAIN_FILE"]).parent
    conf["on_exit"](FakeArbiter())
    assert not metrics_dir.exists()


def test_sigterm_drains_then_stops(monkeypatch, tmp_path):
    marker = tmp_path / "draining"
    conf = load_conf(monkeypatch, CONDUCTION_DRAIN_SECONDS="0.2",
                     CONDUCTION_DRAIN_FILE=str(marker))
    arbiter = FakeArbiter()
    conf["when_ready"](arbiter)
    arbiter.handle_term()  # first SIGTERM: drain, do not stop yet
    assert marker.exists() and arbiter.stopped == 0
    arbiter.manage_workers()  # still serving: workers are still managed
    assert arbiter.managed == 1
    time.sleep(0.25)
    with pytest.raises(StopIteration):  # drain over: gunicorn's graceful stop follows
        arbiter.manage_workers()


def test_second_sigterm_or_no_drain_stops_at_once(monkeypatch, tmp_path):
    marker = tmp_path / "draining"
    conf = load_conf(monkeypatch, CONDUCTION_DRAIN_SECONDS="30",
                     CONDUCTION_DRAIN_FILE=str(marker))
    arbiter = FakeArbiter()
    conf["when_ready"](arbiter)
    arbiter.handle_term()
    with pytest.raises(StopIteration):
        arbiter.handle_term()
    assert arbiter.stopped == 1
    conf = load_conf(monkeypatch, CONDUCTION_DRAIN_FILE=str(tmp_path / "other"))
    arbiter = FakeArbiter()
    conf["when_ready"](arbiter)
    with pytest.raises(StopIteration):
        arbiter.handle_term()
    assert (tmp_path / "other").exists()  # readiness is 503 for the last moments too


def test_runtime_directories_of_killed_masters_are_removed(monkeypatch, tmp_path):
    conf = load_conf(monkeypatch)
    dead, alive = tmp_path / "conduction-dead", tmp_path / "conduction-alive"
    for path, pid in ((dead, 2**22 + 12345), (alive, os.getpid())):  # above any pid_max
        (path / "metrics").mkdir(parents=True)
        (path / "master.pid").write_text(str(pid))
    conf["_remove_orphaned_runtime_dirs"](str(tmp_path))
    assert not dead.exists() and alive.exists()
