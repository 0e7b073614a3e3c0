"""Static checks of docker/: parsed and cross-checked, as no Docker engine runs in CI."""

from __future__ import annotations

import fnmatch
import json
import re
import shlex
import shutil
import subprocess
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pytest
import yaml
from fastapi.testclient import TestClient
from prometheus_client.parser import text_string_to_metric_families

from service.api.app import create_app
from service.config import Settings
from service.runtime.fanout import WORKER_SETTINGS
from service.runtime.telemetry import Telemetry

ROOT = Path(__file__).resolve().parents[2]
DOCKER = ROOT / "docker"
CACHE_DIR = "/var/cache/windvane"
PROMTOOL = shutil.which("promtool")
NO_PROMTOOL = "promtool is not installed (Debian package `prometheus`; .ci/run installs it)"
# Slowest start to a ready /readyz measured (tests/benchmarks/RESULTS.md, "Start-up timeline").
START_UP_SECONDS = 19


@dataclass(frozen=True)
class Instruction:
    """One Dockerfile instruction with its arguments as written."""

    keyword: str
    arguments: str


def instructions(path: Path) -> list[Instruction]:
    """The Dockerfile's instructions, continuation lines joined, comments dropped."""
    found: list[Instruction] = []
    pending = ""
    for raw in path.read_text(encoding="utf-8").splitlines():
        line = raw.strip()
        if not pending and (not line or line.startswith("#")):
            continue
        if pending and line.startswith("#"):
            continue  # comments inside a continued instruction are dropped by the builder
        if line.endswith("\\"):
            pending += line[:-1] + " "
            continue
        whole = (pending + line).strip()
        pending = ""
        keyword, _, arguments = whole.partition(" ")
        found.append(Instruction(keyword.upper(), arguments.strip()))
    assert not pending, "the Dockerfile ends inside a continued line"
    return found


def final_stage(steps: list[Instruction]) -> list[Instruction]:
    starts = [i for i, s in enumerate(steps) if s.keyword == "FROM"]
    return steps[starts[-1] :]


def arg_defaults(steps: list[Instruction]) -> dict[str, str]:
    out: dict[str, str] = {}
    for step in steps:
        if step.keyword == "ARG" and "=" in step.arguments:
            name, _, value = step.arguments.partition("=")
            out[name.strip()] = value.strip()
    return out


def env_of(steps: list[Instruction]) -> dict[str, str]:
    out: dict[str, str] = {}
    for step in steps:
        if step.keyword == "ENV":
            for item in shlex.split(step.arguments):
                name, _, value = item.partition("=")
                out[name] = value
    return out


def base_image(step: Instruction, args: dict[str, str]) -> str:
    image = next(w for w in step.arguments.split() if not w.startswith("--"))
    return re.sub(r"\$\{(\w+)\}", lambda m: args[m.group(1)], image)


@pytest.fixture(scope="module")
def steps() -> list[Instruction]:
    return instructions(DOCKER / "Dockerfile")


@pytest.fixture(scope="module")
def compose() -> dict[str, Any]:
    loaded: dict[str, Any] = yaml.safe_load((DOCKER / "compose.yaml").read_text())
    return loaded


@pytest.fixture(scope="module")
def exported_series() -> set[str]:
    """Every series name the app's telemetry can export, from the runtime's own registry."""
    names: set[str] = set()
    suffixes = {"counter": ("_total",), "histogram": ("_bucket", "_sum", "_count"), "gauge": ("",)}
    for family in Telemetry().registry.collect():
        names.update(family.name + s for s in suffixes.get(family.type, ("",)))
    return names


# --- Dockerfile -------------------------------------------------------------------------


def test_every_stage_builds_on_python_311_slim(steps: list[Instruction]) -> None:
    args = arg_defaults(steps)
    images = [base_image(s, args) for s in steps if s.keyword == "FROM"]
    assert images, "no FROM"
    assert all(re.fullmatch(r"python:3\.11(\.\d+)?-slim(-\w+)?", i) for i in images), images


def test_final_stage_runs_as_a_numeric_non_root_user(steps: list[Instruction]) -> None:
    users = [s.arguments for s in final_stage(steps) if s.keyword == "USER"]
    assert users, "the final stage never drops root"
    user = users[-1].split(":")[0]
    assert user not in {"root", "0"}
    assert user.isdigit(), "a numeric uid lets orchestrators verify runAsNonRoot"
    # USER must come before CMD, or the process still starts as root.
    keywords = [s.keyword for s in final_stage(steps)]
    assert max(i for i, k in enumerate(keywords) if k == "USER") < keywords.index("CMD")


def test_healthcheck_probes_healthz_with_the_interpreter(steps: list[Instruction]) -> None:
    checks = [s.arguments for s in final_stage(steps) if s.keyword == "HEALTHCHECK"]
    assert len(checks) == 1
    check = checks[0]
    command = json.loads(check[check.index("CMD") + 3 :].strip())
    assert command[:2] == ["python", "-c"]
    assert "urllib" in command[2] and "/healthz" in command[2] and "WINDVANE_PORT" in command[2]
    compile(command[2], "<healthcheck>", "exec")
    assert "curl" not in check and "wget" not in check
    assert re.search(r"--timeout=\d+s", check) and re.search(r"--interval=\d+s", check)


def test_runtime_settings_come_from_the_environment(steps: list[Instruction]) -> None:
    stage = final_stage(steps)
    env = env_of(stage)
    assert env["WINDVANE_HOST"] == "0.0.0.0"
    assert env["WINDVANE_CACHE_DIR"] == CACHE_DIR
    assert env["WINDVANE_PORT"].isdigit() and env["WINDVANE_WORKERS"].isdigit()
    # Each of them is a real setting: pydantic-settings reads the same environment.
    settings = Settings(
        **{
            k.removeprefix("WINDVANE_").lower(): v
            for k, v in env.items()
            if k.startswith("WINDVANE_")
        }
    )
    assert str(settings.cache_dir) == CACHE_DIR
    exposed = [s.arguments for s in stage if s.keyword == "EXPOSE"]
    assert exposed == [env["WINDVANE_PORT"]]
    volumes = [json.loads(s.arguments) for s in stage if s.keyword == "VOLUME"]
    assert [CACHE_DIR] in volumes


def test_signal_and_command_let_uvicorn_drain(steps: list[Instruction]) -> None:
    stage = final_stage(steps)
    assert [s.arguments for s in stage if s.keyword == "STOPSIGNAL"] == ["SIGTERM"]
    commands = [s.arguments for s in stage if s.keyword == "CMD"]
    # Exec form: the server is PID 1's child without a shell that would swallow SIGTERM.
    assert [json.loads(c) for c in commands] == [["windvane", "serve"]]
    assert not any(s.keyword == "ENTRYPOINT" for s in stage)


def test_no_test_or_dev_extras_are_installed(steps: list[Instruction]) -> None:
    runs = " ".join(s.arguments for s in steps if s.keyword == "RUN")
    assert "pip" in runs
    assert not re.search(r"\[(test|dev|docs)[^\]]*\]", runs), runs
    for tool in ("pytest", "hypothesis", "schemathesis", "ruff", "mypy"):
        assert tool not in runs


def test_every_copy_source_exists_and_is_in_the_build_context(steps: list[Instruction]) -> None:
    ignore = DOCKER / "Dockerfile.dockerignore"
    patterns = [
        p.strip() for p in ignore.read_text().splitlines() if p.strip() and not p.startswith("#")
    ]
    copies = [s for s in steps if s.keyword in {"COPY", "ADD"}]
    assert copies
    for step in copies:
        words = [w for w in shlex.split(step.arguments) if not w.startswith("--")]
        if "--from=" in step.arguments:
            continue
        for source in words[:-1]:
            assert (ROOT / source).exists(), f"COPY source {source} is missing"
            assert context_includes(source, patterns), f"{source} is excluded by {ignore.name}"


def context_includes(path: str, patterns: list[str]) -> bool:
    """Whether .dockerignore ``patterns`` (last match wins, ! re-includes) keep ``path``."""
    keep = True
    for pattern in patterns:
        negated = pattern.startswith("!")
        body = pattern.lstrip("!").rstrip("/")
        if fnmatch.fnmatch(path, body) or path.startswith(body + "/"):
            keep = negated
    return keep


# --- compose ------------------------------------------------------------------------------


def test_compose_runs_the_service_prometheus_and_the_dashboard(compose: dict[str, Any]) -> None:
    services = compose["services"]
    assert {"windvane", "prometheus", "dashboard"} <= set(services)
    build = services["windvane"]["build"]
    assert (DOCKER / build["context"] / build["dockerfile"]).resolve() == DOCKER / "Dockerfile"
    for name, service in services.items():
        image = service.get("image", "")
        assert image and not image.endswith(":latest") and ":" in image, f"{name}: pin the image"


def test_compose_bind_mounts_exist_and_named_volumes_are_declared(
    compose: dict[str, Any],
) -> None:
    declared = set(compose.get("volumes") or {})
    for name, service in compose["services"].items():
        for mount in service.get("volumes", []):
            source = mount.split(":")[0]
            if source.startswith((".", "/")):
                assert (DOCKER / source).exists(), f"{name}: {source} is missing"
            else:
                assert source in declared, f"{name}: volume {source} is not declared"


def test_compose_keeps_the_cache_on_a_volume_and_outlasts_the_grace_period(
    compose: dict[str, Any],
) -> None:
    service = compose["services"]["windvane"]
    env = service["environment"]
    assert env["WINDVANE_CACHE_DIR"] == CACHE_DIR
    assert any(m.split(":")[1] == CACHE_DIR for m in service["volumes"])
    grace = float(env["WINDVANE_SHUTDOWN_GRACE_SECONDS"])
    stop = float(str(service["stop_grace_period"]).removesuffix("s"))
    assert stop > grace, "Docker would SIGKILL in-flight requests"
    assert service["ports"][0].endswith(":" + env["WINDVANE_PORT"])


def test_prometheus_scrapes_the_service_port(compose: dict[str, Any]) -> None:
    config = yaml.safe_load((DOCKER / "prometheus.yml").read_text())
    job = next(j for j in config["scrape_configs"] if j["job_name"] == "windvane")
    port = int(compose["services"]["windvane"]["environment"]["WINDVANE_PORT"])
    assert job.get("metrics_path", "/metrics") == "/metrics"
    assert job["dns_sd_configs"][0]["names"] == ["windvane"]
    assert job["dns_sd_configs"][0]["port"] == port
    for rule_file in config["rule_files"]:
        assert (DOCKER / rule_file).exists()


def test_dashboard_provisioning_points_at_the_mounted_definition(
    compose: dict[str, Any],
) -> None:
    provider = yaml.safe_load(
        (DOCKER / "dashboard/provisioning/dashboards/windvane.yaml").read_text()
    )
    folder = provider["providers"][0]["options"]["path"]
    mounts = compose["services"]["dashboard"]["volumes"]
    assert any(
        m.split(":")[1].startswith(folder + "/") and m.split(":")[0].endswith(".json")
        for m in mounts
    )
    sources = yaml.safe_load(
        (DOCKER / "dashboard/provisioning/datasources/prometheus.yaml").read_text()
    )
    uids = {d["uid"] for d in sources["datasources"]}
    dashboard = json.loads((DOCKER / "dashboard/windvane.json").read_text())
    for panel in dashboard["panels"]:
        assert panel["datasource"]["uid"] in uids, panel["title"]


# --- dashboard and alerts against the app's metrics ----------------------------------------

REQUIRED_PANELS = {
    "request rate": "windvane_requests_total",
    "latency quantiles": "windvane_request_duration_seconds_bucket",
    "error ratio": "windvane_requests_total",
    "cache hit ratio": "windvane_cache_lookups_total",
    "fit time by family": "windvane_fit_duration_seconds_bucket",
    "queue depth": "windvane_pool_queue_depth",
}


def metric_names(expression: str) -> set[str]:
    return set(re.findall(r"\bwindvane_[a-z_]+\b", expression))


def dashboard_expressions() -> dict[str, list[str]]:
    dashboard = json.loads((DOCKER / "dashboard/windvane.json").read_text())
    return {p["title"].lower(): [t["expr"] for t in p["targets"]] for p in dashboard["panels"]}


def test_dashboard_has_every_required_panel() -> None:
    panels = dashboard_expressions()
    for wanted, metric in REQUIRED_PANELS.items():
        title = next((t for t in panels if t.startswith(wanted)), None)
        assert title is not None, f"no panel {wanted!r}"
        assert any(metric in metric_names(e) for e in panels[title]), (wanted, panels[title])
    assert "histogram_quantile" in " ".join(panels["latency quantiles"])
    assert "family" in " ".join(panels["fit time by family"])


def test_every_metric_the_dashboard_and_alerts_use_is_exported(exported_series: set[str]) -> None:
    used = {n for exprs in dashboard_expressions().values() for e in exprs for n in metric_names(e)}
    for group in yaml.safe_load((DOCKER / "alerts.yml").read_text())["groups"]:
        used |= {n for rule in group["rules"] for n in metric_names(rule["expr"])}
    assert used, "no windvane metric found in the dashboard"
    assert used <= exported_series, sorted(used - exported_series)


def test_live_metrics_endpoint_serves_the_names_the_dashboard_uses(tmp_path: Path) -> None:
    # The same check against a running app: what /metrics really prints after one request.
    settings = Settings(pool_workers=1, cache_dir=tmp_path / "cache", api_keys="")
    with TestClient(create_app(settings)) as client:
        assert client.get("/v1/models").status_code == 200
        text = client.get("/metrics").text
    live = {s.name for f in text_string_to_metric_families(text) for s in f.samples}
    assert "windvane_requests_total" in live
    assert "windvane_pool_queue_depth" in live
    assert "windvane_cache_lookups_total" in live


@pytest.mark.skipif(PROMTOOL is None, reason=NO_PROMTOOL)
def test_promtool_accepts_the_prometheus_config_and_rules() -> None:
    for args in (["check", "config", "prometheus.yml"], ["check", "rules", "alerts.yml"]):
        done = subprocess.run(
            [str(PROMTOOL), *args],
            cwd=DOCKER,
            capture_output=True,
            text=True,
            timeout=60,
            check=False,
        )
        assert done.returncode == 0, done.stdout + done.stderr


@pytest.mark.skipif(PROMTOOL is None, reason=NO_PROMTOOL)
def test_promtool_parses_every_dashboard_expression(tmp_path: Path) -> None:
    # The dashboard's queries as recording rules, so promtool's PromQL parser checks each one.
    rules = []
    for title, exprs in dashboard_expressions().items():
        for i, expr in enumerate(exprs):
            record = re.sub(r"[^a-z0-9]+", "_", f"dashboard:{title}:{i}")
            rules.append(
                {
                    "record": record.replace("dashboard_", "dashboard:", 1),
                    "expr": expr.replace("$__rate_interval", "5m"),
                }
            )
    path = tmp_path / "dashboard_rules.yml"
    path.write_text(yaml.safe_dump({"groups": [{"name": "dashboard", "rules": rules}]}))
    done = subprocess.run(
        [str(PROMTOOL), "check", "rules", str(path)],
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )
    assert done.returncode == 0, done.stdout + done.stderr


# --- alerts, Alertmanager, reproducible installs ---------------------------------------


@pytest.mark.skipif(PROMTOOL is None, reason=NO_PROMTOOL)
def test_promtool_unit_tests_of_the_alerts_pass() -> None:
    # A missing target (no `up` sample at all) fires WindvaneAbsent; `up == 0` WindvaneDown.
    done = subprocess.run(
        [str(PROMTOOL), "test", "rules", "alerts_test.yml"],
        cwd=Path(__file__).parent,
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )
    assert done.returncode == 0, done.stdout + done.stderr


def test_the_down_alert_also_fires_when_the_target_is_gone() -> None:
    rules = yaml.safe_load((DOCKER / "alerts.yml").read_text())["groups"][0]["rules"]
    expressions = {rule["alert"]: rule["expr"] for rule in rules}
    assert expressions["WindvaneAbsent"] == 'absent(up{job="windvane"})'


def test_prometheus_sends_alerts_to_the_compose_alertmanager(compose: dict[str, Any]) -> None:
    config = yaml.safe_load((DOCKER / "prometheus.yml").read_text())
    [target] = config["alerting"]["alertmanagers"][0]["static_configs"][0]["targets"]
    host, port = target.split(":")
    service = compose["services"][host]
    assert service["image"].startswith("prom/alertmanager:")
    assert any(p.endswith(f":{port}") for p in service["ports"])
    mounted = dict(m.split(":")[:2] for m in service["volumes"] if m.startswith("./"))
    config_arg = next(a for a in service["command"] if a.startswith("--config.file="))
    source = next(s for s, t in mounted.items() if t == config_arg.split("=", 1)[1])
    routing = yaml.safe_load((DOCKER / source).read_text())
    receivers = {r["name"] for r in routing["receivers"]}
    assert routing["route"]["receiver"] in receivers
    assert all(r["receiver"] in receivers for r in routing["route"].get("routes", []))
    assert (
        "prometheus" in compose["services"]
        and host in compose["services"]["prometheus"]["depends_on"]
    )


def test_the_image_installs_the_committed_constraints(steps: list[Instruction]) -> None:
    constraints = DOCKER / "constraints.txt"
    pins = [
        line.strip()
        for line in constraints.read_text().splitlines()
        if line.strip() and not line.startswith("#")
    ]
    names = {re.split(r"==", p)[0].lower().replace("_", "-") for p in pins}
    assert all(re.fullmatch(r"[A-Za-z0-9._-]+==[A-Za-z0-9.+!-]+", p) for p in pins), pins
    assert {"fastapi", "numpy", "pandas", "scipy", "statsmodels", "uvicorn"} <= names
    assert not names & {"pytest", "hypothesis", "schemathesis", "ruff", "mypy"}
    # Every runtime dependency the project declares is pinned: adding one means `sh docker/lock.sh`.
    declared = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["dependencies"]
    wanted = {
        re.split(r"[<>=!~\[; ]", d, maxsplit=1)[0].lower().replace("_", "-") for d in declared
    }
    assert wanted <= names, f"not in docker/constraints.txt: {sorted(wanted - names)}"
    wheel_runs = [s.arguments for s in steps if s.keyword == "RUN" and "pip wheel" in s.arguments]
    assert wheel_runs and all("constraints.txt" in r for r in wheel_runs), wheel_runs
    assert "sh docker/lock.sh" in constraints.read_text()


def test_the_healthcheck_start_period_covers_the_measured_start_up(
    steps: list[Instruction],
) -> None:
    # The port opens at once and /healthz answers while the pool warms (RESULTS.md has the
    # start-up timeline); the start period must still cover the slowest start measured.
    [check] = [s.arguments for s in final_stage(steps) if s.keyword == "HEALTHCHECK"]
    start = int(re.search(r"--start-period=(\d+)s", check).group(1))  # type: ignore[union-attr]
    assert START_UP_SECONDS <= start <= 3 * START_UP_SECONDS + 10


def test_the_readme_runs_the_image_with_an_init_process() -> None:
    readme = (ROOT / "README.md").read_text()
    runs = [line for line in readme.splitlines() if line.strip().startswith("docker run")]
    assert runs and all("--init" in line for line in runs), runs


# --- compose: the batch profile -------------------------------------------------------------


def option(command: list[str], name: str) -> str:
    """The value after ``name`` in a command list."""
    return command[command.index(name) + 1]


def test_the_batch_profile_is_a_dask_cluster_of_the_windvane_image(
    compose: dict[str, Any], steps: list[Instruction]
) -> None:
    services = compose["services"]
    scheduler, worker = services["batch-scheduler"], services["batch-worker"]
    for service in (scheduler, worker):
        assert service["profiles"] == ["batch"]
        # Naming only the batch services (as the README does) builds the service's image.
        assert service["build"] == services["windvane"]["build"]
        assert service["image"] == services["windvane"]["image"]
    # The image installs Dask (the [batch] extra), so the `dask` commands exist in it.
    extra = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]["optional-dependencies"]
    assert any(d.startswith("dask[distributed]") for d in extra["batch"])
    assert any('"windvane[batch]"' in s.arguments for s in final_stage(steps) if s.keyword == "RUN")
    assert scheduler["command"][:2] == ["dask", "scheduler"]
    port = option(scheduler["command"], "--port")
    assert f"127.0.0.1:{port}:{port}" in scheduler["ports"]
    command = worker["command"]
    assert command[:3] == ["dask", "worker", f"tcp://batch-scheduler:{port}"]
    assert option(command, "--nthreads") == "1" and option(command, "--nworkers") == "1"
    env = worker["environment"]
    assert all(
        env[k] == "1" for k in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")
    )


def test_batch_workers_share_the_services_cache_and_secret(compose: dict[str, Any]) -> None:
    services = compose["services"]
    service, worker = services["windvane"]["environment"], services["batch-worker"]
    assert worker["environment"]["WINDVANE_CACHE_DIR"] == service["WINDVANE_CACHE_DIR"]
    assert worker["environment"]["WINDVANE_CACHE_SECRET"] == service["WINDVANE_CACHE_SECRET"]
    assert worker["volumes"] == services["windvane"]["volumes"]


def test_batch_services_probe_their_own_health_endpoint(compose: dict[str, Any]) -> None:
    # The image's HEALTHCHECK probes the service's port, where nothing listens in a Dask
    # container: each batch service probes Dask's /health on its own HTTP port.
    services = compose["services"]
    for name in ("batch-scheduler", "batch-worker"):
        service = services[name]
        port = option(service["command"], "--dashboard-address").lstrip(":")
        probe = " ".join(service["healthcheck"]["test"])
        assert f"http://127.0.0.1:{port}/health" in probe, name
    assert services["batch-worker"]["depends_on"]["batch-scheduler"]["condition"] == (
        "service_healthy"
    )


def test_the_readme_starts_the_batch_profile_by_existing_service_names(
    compose: dict[str, Any],
) -> None:
    readme = (ROOT / "README.md").read_text()
    [line] = [x for x in readme.splitlines() if "--profile batch" in x and "compose" in x]
    words = line.split()
    assert words[words.index("--profile") + 1] == "batch"
    named = [w for w in words if w.startswith("batch-")]
    assert named and set(named) <= set(compose["services"]), named
    port = option(compose["services"]["batch-scheduler"]["command"], "--port")
    assert f"--scheduler tcp://127.0.0.1:{port}" in readme


def test_compose_batch_workers_run_with_the_batch_jobs_dask_settings(
    compose: dict[str, Any],
) -> None:
    """Each of WORKER_SETTINGS as the DASK_ variable that dask reads into it."""
    import dask.config

    env = compose["services"]["batch-worker"]["environment"]
    for key, value in WORKER_SETTINGS.items():
        name = "DASK_" + key.upper().replace(".", "__").replace("-", "_")
        assert name in env, name
        read = dask.config.collect_env({name: env[name]})
        assert dask.config.get(key, config=read) == value, name
