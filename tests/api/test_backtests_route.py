"""POST /v1/backtests and POST /v1/forecast-batches through HTTP."""

from __future__ import annotations

from typing import Any

from service import demo


def test_a_backtest_ranks_the_given_models(client: Any) -> None:
    body = demo.request_body("orders", "backtest", horizon=4)
    body["models"] = [{"family": "naive"}, {"family": "seasonal_naive"}, {"family": "drift"}]
    response = client.post("/v1/backtests", json=body)
    assert response.status_code == 200
    found = response.json()
    assert [m["label"] for m in found["models"]][:1] == ["naive"]
    assert len(found["ranking"]) == 3
    first = found["models"][0]
    assert len(first["steps"]) == 4
    for key in ("mae", "rmse", "mase", "smape", "observed_coverage", "msis"):
        assert key in first["overall"], key


def test_every_origin_estimation_fits_again_before_each_origin(client: Any) -> None:
    # A series whose slope changes: drift estimated once keeps the early slope at the last
    # origin, estimated again it takes the slope of all the points before that origin.
    values = [float(i) for i in range(20)] + [20.0 + 5.0 * i for i in range(1, 11)]
    body: dict[str, Any] = {
        "series": {"start": "2020", "frequency": "P1Y", "values": values},
        "models": ["drift"],
        "horizon": 2,
        "origins": 3,
        "step": 2,
    }
    once = client.post("/v1/backtests", json=body).json()
    again = client.post("/v1/backtests", json={**body, "estimation": "every_origin"}).json()
    assert once["estimation"] == "first_origin"
    assert again["estimation"] == "every_origin"
    assert once["origins"] == again["origins"]
    # The first origin's window is forecast from the same estimate either way; later windows
    # see the steeper slope, so the errors shrink.
    assert again["models"][0]["overall"]["mae"] < once["models"][0]["overall"]["mae"]


def test_an_unknown_estimation_is_named(client: Any) -> None:
    body = demo.request_body("orders", "backtest", horizon=4)
    response = client.post("/v1/backtests", json={**body, "estimation": "sometimes"})
    assert response.status_code == 422
    assert response.json()["errors"][0]["field"] == "estimation"


def test_too_few_points_for_the_origins_names_the_fields(client: Any) -> None:
    body = {
        "series": {
            "start": "2025-01-01",
            "frequency": "P1D",
            "values": [1.0 * i for i in range(12)],
        },
        "models": [{"family": "naive"}],
        "horizon": 6,
        "origins": 5,
        "step": 3,
    }
    response = client.post("/v1/backtests", json=body)
    assert response.status_code == 422
    fields = {e["field"] for e in response.json()["errors"]}
    assert fields & {"origins", "horizon", "step"}, fields


def test_an_unknown_model_in_a_backtest_is_named(client: Any) -> None:
    body = demo.request_body("orders", "backtest", horizon=4)
    body["models"] = [{"family": "naive"}, {"family": "crystal_ball"}]
    response = client.post("/v1/backtests", json=body)
    assert response.status_code == 422
    assert response.json()["errors"][0]["field"] == "models[1].family"


def test_a_batch_answers_each_request_on_its_own(client: Any) -> None:
    good = demo.request_body("orders", horizon=3)
    good["model"] = {"family": "seasonal_naive"}
    bad = demo.request_body("orders", horizon=3)
    bad["series"]["values"][4] = True
    response = client.post("/v1/forecast-batches", json={"requests": [good, bad]})
    assert response.status_code == 200
    found = response.json()
    assert (found["succeeded"], found["failed"]) == (1, 1)
    assert found["results"][0]["forecast"]["model"]["family"] == "seasonal_naive"
    problem = found["results"][1]["problem"]
    assert found["results"][1]["status"] == 422
    assert problem["errors"][0]["field"] == "requests[1].series.values[4]"


def test_a_batch_over_the_limit_is_refused(make_client: Any) -> None:
    one = demo.request_body("spares", horizon=3)
    one["model"] = {"family": "naive"}
    with make_client(max_batch_series=2) as client:
        response = client.post("/v1/forecast-batches", json={"requests": [one, one, one]})
    assert response.status_code == 422
    assert response.json()["errors"][0]["field"] == "requests"


def test_the_estimation_choices_are_the_core_s() -> None:
    from typing import get_args

    from service.api.schemas.common import Estimation
    from service.core.evaluation.backtest import ESTIMATIONS

    assert get_args(Estimation) == ESTIMATIONS
