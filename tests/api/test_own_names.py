"""Windvane's own names on the wire: every family's label in a live response, the renamed
options, and the OpenAPI document.

Labels keep the trade's notations (ETS letters, Box-Jenkins orders, STL, Box-Cox) and say the
rest in plain lower-case words; suffixes such as " with drift" and class-like words such as
``SeasonalNaive(12)`` belong to other tools' printouts, not to ours.
"""

from __future__ import annotations

import json
import re
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from fastapi.testclient import TestClient

from tests.multi_period_series import hourly_counts

PATH = "/v1/forecasts"
OPENAPI = Path(__file__).resolve().parents[2] / "openapi" / "openapi.json"
NOTATION = re.compile(
    r"ETS\([AM],(?:N|A|Ad|M|Md),[NAM]\)|ARIMA\(\d+,\d+,\d+\)(?:x\(\d+,\d+,\d+\)\d+)?"
)
TRADE_WORDS = {"ETS", "ARIMA", "STL", "MSTL", "Box-Cox", "Croston's", "Syntetos-Boylan"}
OLD_OPTIONS = ('"lambda"', '"bias_adjusted"', '"include_constant"')


def own_words_problem(label: str) -> str | None:
    """Why ``label`` reads like another tool's printout, or None when it is ours."""
    for suffix in (" with drift", " with mean"):
        if suffix in label:
            return f"suffix {suffix!r}"
    rest = NOTATION.sub(" ", label)
    for word in re.findall(r"[A-Za-z][A-Za-z'-]*", rest):
        if word not in TRADE_WORDS and any(c.isupper() for c in word):
            return f"capitalised or CamelCase word {word!r}"
    return None


@pytest.mark.parametrize(
    ("label", "ours"),
    [
        ("ARIMA(2,1,1) with drift", False),
        ("ARIMA(1,0,0) with mean", False),
        ("SeasonalNaive(12)", False),
        ("Combination(Naive, Drift)", False),
        ("Theta", False),
        ("ARIMA(2,1,1), constant: drift", True),
        ("STL (period 24) then ETS(A,Ad,N)", True),
        ("ETS(M,Md,M), on the Box-Cox scale (power 0.5)", True),
    ],
)
def test_the_check_itself(label: str, ours: bool) -> None:
    assert (own_words_problem(label) is None) is ours


def _series(kind: str) -> dict[str, Any]:
    if kind == "hourly":
        y = hourly_counts(weeks=4)
        return {
            "start": y.index[0].isoformat(),
            "frequency": "h",
            "seasonal_period": [24, 168],
            "values": [float(v) for v in y],
        }
    rng = np.random.default_rng(11)
    t = np.arange(72)
    if kind == "intermittent":
        values = np.where(rng.random(72) < 0.35, rng.integers(1, 9, 72), 0).astype(float)
    else:
        values = 200 + 1.5 * t + 40 * np.sin(2 * np.pi * t / 12) + rng.normal(0, 6, 72)
    return {"start": "2019-01-01", "frequency": "MS", "values": [float(v) for v in values]}


ETS_AAN = {"family": "ets", "error": "add", "trend": "add", "damped": True, "season": "none"}
ETS_ANN = {"family": "ets", "error": "add", "trend": "none", "season": "none"}
FAMILIES: list[tuple[dict[str, Any], dict[str, Any], str]] = [
    ({"family": "mean"}, {}, "mean"),
    ({"family": "naive"}, {}, "naive"),
    ({"family": "drift"}, {}, "drift"),
    ({"family": "seasonal_naive"}, {}, "seasonal naive, period 12"),
    (ETS_AAN, {}, "ETS(A,Ad,N)"),
    (
        {"family": "arima", "order": [2, 1, 1], "seasonal_order": [0, 0, 0], "constant": "drift"},
        {},
        "ARIMA(2,1,1), constant: drift",
    ),
    (
        {"family": "arima", "order": [1, 0, 0], "seasonal_order": [0, 0, 0], "constant": "mean"},
        {},
        "ARIMA(1,0,0), constant: mean",
    ),
    (
        {"family": "arima", "order": [0, 1, 1], "seasonal_order": [0, 1, 1]},
        {},
        "ARIMA(0,1,1)x(0,1,1)12",
    ),
    ({"family": "theta"}, {}, "theta, seasonally adjusted (period 12)"),
    ({"family": "stl", "base": ETS_ANN}, {}, "STL (period 12) then ETS(A,N,N)"),
    ({"family": "croston"}, {"kind": "intermittent"}, "Croston's method"),
    (
        {"family": "croston", "variant": "sba"},
        {"kind": "intermittent"},
        "Croston's method, Syntetos-Boylan correction",
    ),
    (
        {
            "family": "combination",
            "members": [{"family": f} for f in ("mean", "naive", "drift")]
            + [{"family": "seasonal_naive"}],
        },
        {},
        "combination of 4 models",
    ),
    (
        {"family": "mstl", "base": ETS_ANN},
        {"kind": "hourly"},
        "MSTL (periods 24, 168) then ETS(A,N,N)",
    ),
    (
        {"family": "harmonic_regression", "harmonics": [3, 2]},
        {"kind": "hourly"},
        "harmonic regression (periods 24, 168; harmonics 3, 2) with ARIMA(",
    ),
    (ETS_ANN, {"transform": "log"}, "ETS(A,N,N), on the log scale"),
    (
        {"family": "naive"},
        {"transform": {"kind": "boxcox", "power": 0.5, "back_transform": "median"}},
        "naive, on the Box-Cox scale (power 0.5)",
    ),
]


@pytest.mark.parametrize(("model", "options", "label"), FAMILIES, ids=[f[2] for f in FAMILIES])
def test_every_family_label_in_a_live_response(
    client: TestClient, model: dict[str, Any], options: dict[str, Any], label: str
) -> None:
    body: dict[str, Any] = {
        "series": _series(options.get("kind", "seasonal")),
        "horizon": 3,
        "model": model,
    }
    if "transform" in options:
        body["transform"] = options["transform"]
    answer = client.post(PATH, json=body)
    assert answer.status_code == 200, answer.text
    got = answer.json()["model"]["label"]
    assert got.startswith(label) if label.endswith("(") else got == label
    assert own_words_problem(got) is None


def test_auto_labels_are_ours(client: TestClient) -> None:
    answer = client.post(PATH, json={"series": _series("seasonal"), "horizon": 3})
    assert answer.status_code == 200, answer.text
    found = answer.json()
    labels = [found["model"]["label"]] + [r["label"] for r in found["selection"]["ranking"]]
    assert len(labels) > 3
    for label in labels:
        assert own_words_problem(label) is None, (label, own_words_problem(label))


@pytest.mark.parametrize(
    ("body", "field", "new"),
    [
        ({"transform": {"kind": "boxcox", "lambda": 0.5}}, "transform", "transform.power"),
        ({"transform": {"kind": "log", "bias_adjusted": False}}, "transform", "back_transform"),
        (
            {"model": {"family": "arima", "order": [1, 0, 0], "include_constant": True}},
            "model.include_constant",
            "model.constant",
        ),
    ],
)
def test_old_option_names_are_refused_naming_the_new_one(
    client: TestClient, body: dict[str, Any], field: str, new: str
) -> None:
    answer = client.post(PATH, json={"series": _series("seasonal"), "horizon": 3, **body})
    assert answer.status_code == 422
    errors = answer.json()["errors"]
    assert errors[0]["field"] == field
    assert new in errors[0]["message"]


def test_the_openapi_document_has_none_of_the_old_option_names() -> None:
    text = OPENAPI.read_text(encoding="utf-8")
    for old in OLD_OPTIONS:
        assert old not in text, old
    schema = json.loads(text)
    transform = schema["components"]["schemas"]["TransformIn"]["properties"]
    assert set(transform) == {"kind", "power", "back_transform"}
