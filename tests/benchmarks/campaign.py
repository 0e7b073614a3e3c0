"""A wider bad-input campaign than tests/api/test_campaign.py, run by hand (it fits many
models: about a minute on this machine). Every answer must be below 500, an error must be a
problem+json document, and a 200 must hold no NaN; the count of offenders is printed with the
load average.

    python -m tests.benchmarks.campaign
"""

from __future__ import annotations

import json
import os
import tempfile
import time
from pathlib import Path
from typing import Any

from fastapi.testclient import TestClient

from service.api.app import create_app
from service.config import Settings

Request = tuple[str, dict[str, Any], dict[str, str]]


def frequency_and_value_cases() -> list[Request]:
    """Frequency spellings, timestamps at the edges, extreme values on every family."""
    V = [float(10 + (i % 7) + 0.1 * i) for i in range(40)]

    def s(**k):
        b = {"start": "2024-01-01", "frequency": "D", "values": list(V)}
        b.update(k)
        return {a: c for a, c in b.items() if c is not None}

    cases: list[Request] = []
    for f in [
        "M",
        "m",
        "Q",
        "A",
        "Y",
        "H",
        "T",
        "S",
        "15T",
        "3M",
        "W",
        "w-tue",
        "B",
        "b",
        "P1D",
        "PT90M",
        "P0D",
        "PT0S",
        "P1Y",
        "P2Y",
        "P12M",
        "P1W2D",
        "PT1.5H",
        "QS",
        "QS-FEB",
        "YS-MAR",
        "BMS",
        "BME",
        "SME",
        "SMS",
        "C",
        "CBMS",
        "h ",
        " D",
        "D\x00",
        "1h30min",
        "0.5D",
        "-1D",
        "+1D",
        "1_000D",
        "１D",
        "P1D ",
        "p1d",
        "pt1h",
        "Ｐ1D",
    ]:
        st = {
            "M": "2024-01-31",
            "m": "2024-01-31",
            "Q": "2024-03-31",
            "A": "2024-12-31",
            "Y": "2024-12-31",
            "3M": "2024-01-31",
        }.get(f, "2024-01-01")
        cases.append(
            (
                "/v1/forecasts",
                {"series": s(frequency=f, start=st), "horizon": 3, "model": {"family": "naive"}},
                {},
            )
        )
    for ts in [
        ["2024-01-01T00:00:00+14:00", "2024-01-02T00:00:00+14:00", "2024-01-03T00:00:00+14:00"],
        ["2024-02-29", "2025-02-28", "2026-02-28"],
        ["2024-03-31T01:30:00Z", "2024-03-31T02:30:00Z", "2024-03-31T03:30:00Z"],
        [
            "2024-01-01T00:00:00.123456789",
            "2024-01-01T00:00:01.123456789",
            "2024-01-01T00:00:02.123456789",
        ],
        ["2024-W01", "2024-W02", "2024-W03"],
        ["2024-001", "2024-002", "2024-003"],
        ["20240101", "20240102", "20240103"],
        ["2024-01-01T24:00", "2024-01-02T24:00", "2024-01-03T24:00"],
        ["1677-09-22", "1677-09-23", "1677-09-24"],
        ["2262-04-10", "2262-04-11", "2262-04-12"],
        ["2024-01-01T00:00:00+25:00", "2024-01-02", "2024-01-03"],
        ["2024-01-01", "2024-01-01T00:00:00.000000001", "2024-01-02"],
    ]:
        cases.append(
            (
                "/v1/forecasts",
                {
                    "series": {"timestamps": ts, "values": [1, 2, 3]},
                    "horizon": 2,
                    "model": {"family": "naive"},
                },
                {},
            )
        )
        cases.append(
            (
                "/v1/diagnostics",
                {
                    "series": {
                        "timestamps": ts,
                        "values": [
                            1,
                            2,
                            3,
                        ][: len(ts)],
                    }
                },
                {},
            )
        )
    for vals in [
        [0.0] * 40,
        [1e-300] * 40,
        [1e30] * 40,
        [-1e30, 1e30] * 20,
        [5e-324] * 40,
        [1.0] + [None] * 39,
        [None] * 39 + [1.0],
        [1e15 + i for i in range(40)],
        [(-1) ** i * 1e29 for i in range(40)],
    ]:
        for model in [
            "auto",
            {"family": "ets"},
            {"family": "arima"},
            {"family": "theta"},
            {"family": "croston"},
            {"family": "stl", "base": {"family": "ets"}},
            {"family": "drift"},
        ]:
            cases.append(
                (
                    "/v1/forecasts",
                    {
                        "series": s(values=vals),
                        "horizon": 5,
                        "model": model,
                        "include": ["fitted", "residuals"],
                    },
                    {},
                )
            )
        cases.append(("/v1/diagnostics", {"series": s(values=vals), "include": ["components"]}, {}))
        cases.append(
            ("/v1/backtests", {"series": s(values=vals), "horizon": 3, "models": "auto"}, {})
        )
    for tr in [
        {"kind": "boxcox", "power": 5},
        {"kind": "boxcox", "power": -5},
        {"kind": "boxcox", "power": 0},
        {"kind": "boxcox"},
        {"kind": "log"},
    ]:
        for vals in [
            V,
            [1e-300] * 40,
            [1e29 + i * 1e27 for i in range(40)],
            [1e-30 * (1 + i) for i in range(40)],
        ]:
            cases.append(
                (
                    "/v1/forecasts",
                    {
                        "series": s(values=vals),
                        "horizon": 5,
                        "model": {"family": "ets"},
                        "transform": tr,
                        "coverage": [0.5, 0.99],
                    },
                    {},
                )
            )
    for sp in [1, 2, 39, 40, 41, 1000, 2000]:
        cases.append(
            ("/v1/forecasts", {"series": s(seasonal_period=sp), "horizon": 5, "model": "auto"}, {})
        )
        cases.append(("/v1/diagnostics", {"series": s(seasonal_period=sp), "max_lag": 1000}, {}))
    for o, st in [(100, 1), (1, 100000), (50, 50)]:
        cases.append(
            ("/v1/backtests", {"series": s(), "horizon": 50, "origins": o, "step": st}, {})
        )
    for model, history, future in (
        ({"family": "arima", "order": [5, 2, 5], "seasonal_order": [2, 1, 2]}, [1e30], [1e30]),
        ({"family": "arima"}, [0], [0]),
        ({"family": "arima"}, [None], [1e308]),
    ):
        regressor = {"name": "x", "history": history * 40, "future": future * 3}
        body = {"series": s(), "horizon": 3, "model": model, "regressors": [regressor]}
        cases.append(("/v1/forecasts", body, {}))
    cases.append(
        (
            "/v1/forecasts",
            {
                "series": s(),
                "horizon": 3,
                "model": {
                    "family": "combination",
                    "members": [{"family": "naive"}],
                    "weights": [5e-324],
                },
            },
            {},
        )
    )
    cases.append(
        (
            "/v1/forecasts",
            {"series": s(), "horizon": 3, "model": {"family": "combination", "members": []}},
            {},
        )
    )
    cases.append(
        ("/v1/forecasts", {"series": s(), "horizon": 3, "model": {"family": "seasonal_naive"}}, {})
    )
    cases.append(
        (
            "/v1/forecasts",
            {
                "series": s(aggregate={"frequency": "MS", "method": "last"}),
                "horizon": 3,
                "model": {"family": "naive"},
            },
            {},
        )
    )
    cases.append(
        (
            "/v1/forecasts",
            {
                "series": s(aggregate={"frequency": "P100Y"}),
                "horizon": 3,
                "model": {"family": "naive"},
            },
            {},
        )
    )
    cases.append(
        (
            "/v1/forecasts",
            {"series": s(aggregate={"frequency": "B"}), "horizon": 3, "model": {"family": "naive"}},
            {},
        )
    )
    cases.append(
        (
            "/v1/forecasts",
            {
                "series": s(start="2261-01-01", frequency="W"),
                "horizon": 50,
                "model": {"family": "naive"},
            },
            {},
        )
    )
    cases.append(
        (
            "/v1/forecasts",
            {
                "series": s(start="1678-01-01", frequency="D"),
                "horizon": 50,
                "model": {"family": "naive"},
            },
            {},
        )
    )
    cases.append(
        (
            "/v1/forecasts",
            {
                "series": {
                    "timestamps": ["2024-01-01", "2024-01-08", "2030-01-01"],
                    "values": [1, 2, 3],
                    "frequency": "W-MON",
                },
                "horizon": 3,
                "model": {"family": "naive"},
            },
            {},
        )
    )
    return cases


def option_and_header_cases() -> list[Request]:
    """Candidates, options, regressors, names, content types and Accept headers."""
    V = [float(10 + (i % 7) + 0.1 * i) for i in range(60)]
    S = {"start": "2024-01-01", "frequency": "D", "values": V}
    reqs: list[Request] = []

    def f(**k):
        b = {"series": dict(S), "horizon": 3}
        b.update(k)
        return b

    for cand in [
        [{"family": "naive"}],
        [{"family": "arima", "order": [9, 2, 9]}],
        [{"family": "ets", "season": "mul", "seasonal_period": 500}],
        [{"family": "stl", "base": {"family": "stl", "base": {"family": "naive"}}}],
        [{"family": "theta", "seasonal_period": 0}],
        [{"family": "croston", "variant": "x"}],
        [{}],
        [{"family": None}],
        [{"family": ["naive"]}],
        [{"family": "combination", "members": [{"family": "combination", "members": []}]}],
    ]:
        reqs.append(("/v1/forecasts", f(model="auto", candidates=cand), {}))
        reqs.append(("/v1/forecasts", f(model=cand[0]), {}))
        reqs.append(("/v1/backtests", {"series": S, "horizon": 3, "models": cand}, {}))
    for m in ["mase", "smape", "rmse", "mae", "MASE", None, 1]:
        reqs.append(("/v1/forecasts", f(model="auto", metric=m), {}))
    for ml in [1, 59, 60, 1000, 0, -1, 2.5]:
        reqs.append(("/v1/diagnostics", {"series": S, "max_lag": ml}, {}))
    for sp in [59, 60, 61, 2000]:
        reqs.append(
            (
                "/v1/diagnostics",
                {"series": {**S, "seasonal_period": sp}, "include": ["components"]},
                {},
            )
        )
        reqs.append(
            (
                "/v1/forecasts",
                f(
                    series={**S, "seasonal_period": sp},
                    model={"family": "stl", "base": {"family": "ets"}},
                ),
                {},
            )
        )
        reqs.append(
            (
                "/v1/forecasts",
                f(series={**S, "seasonal_period": sp}, model={"family": "seasonal_naive"}),
                {},
            )
        )
        reqs.append(
            (
                "/v1/forecasts",
                f(series={**S, "seasonal_period": sp}, model={"family": "ets", "season": "add"}),
                {},
            )
        )
        reqs.append(
            (
                "/v1/forecasts",
                f(
                    series={**S, "seasonal_period": sp},
                    model={"family": "arima", "seasonal_order": [1, 1, 1]},
                ),
                {},
            )
        )
    for reg in [
        [{"name": "x", "history": [1] * 59, "future": [1] * 3}],
        [{"name": "x", "history": [1] * 60, "future": [1] * 2}],
        [{"name": "x", "history": ["a"] * 60, "future": [1] * 3}],
        [{"name": "x", "history": [1] * 60}],
        [{"name": "", "history": [1] * 60, "future": [1] * 3}] * 2,
        [{"name": "x" * 100, "history": list(range(60)), "future": [60, 61, 62]}],
    ]:
        reqs.append(
            ("/v1/forecasts", f(model={"family": "arima", "order": [1, 0, 0]}, regressors=reg), {})
        )
    for name in ["\u0000", "\u202e", "a" * 200, "a" * 201, "😀" * 100]:
        reqs.append(("/v1/forecasts", f(series={**S, "name": name}, model={"family": "naive"}), {}))
    for inc in [["fitted"], ["residuals", "fitted"], ["fitted", "fitted"], ["other"], "fitted"]:
        reqs.append(("/v1/forecasts", f(model={"family": "ets"}, include=inc), {}))
    for ct in [
        "text/plain",
        "application/json; charset=latin-1",
        "application/x-www-form-urlencoded",
        "multipart/form-data; boundary=x",
        "text/csv",
        "application/merge-patch+json",
        "",
    ]:
        reqs.append(("/v1/forecasts", f(model={"family": "naive"}), {"content-type": ct}))
    for acc in [
        "text/csv",
        "image/svg+xml",
        "image/png",
        "application/xml",
        "*/*;q=0",
        "text/*",
        "application/json;q=0",
        "a" * 5000,
    ]:
        reqs.append(("/v1/forecasts", f(model={"family": "naive"}), {"accept": acc}))
        reqs.append(("/v1/diagnostics", {"series": S}, {"accept": acc}))
    return reqs


def main() -> None:
    directory = Path(tempfile.mkdtemp())
    settings = Settings(
        pool_workers=1,
        queue_size=8,
        cache_dir=directory / "cache",
        api_keys="",
        fit_seconds=20,
        max_points=2000,
        max_horizon=50,
        log_level="error",
    )
    requests = frequency_and_value_cases() + option_and_header_cases()
    offenders = 0
    started = time.perf_counter()
    with TestClient(create_app(settings), raise_server_exceptions=False) as client:
        for path, body, headers in requests:
            sent = {"content-type": "application/json", **headers}
            if not sent["content-type"]:
                sent.pop("content-type")
            answer = client.post(path, content=json.dumps(body).encode(), headers=sent)
            kind = answer.headers.get("content-type", "")
            clean = answer.status_code < 500 and (
                kind.startswith("application/problem+json")
                if answer.status_code >= 400
                else "NaN" not in answer.text
            )
            if not clean:
                offenders += 1
                print(answer.status_code, path, headers, json.dumps(body)[:160], answer.text[:200])
    seconds = time.perf_counter() - started
    print(
        f"{len(requests)} requests, {offenders} offenders, {seconds:.0f} s, "
        f"load average {os.getloadavg()[0]:.2f}"
    )


if __name__ == "__main__":
    main()
