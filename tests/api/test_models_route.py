"""GET /v1/models: the catalogue agrees with the registry that validates specifications."""

from __future__ import annotations

from typing import Any

import pytest
from fastapi.testclient import TestClient

from service.core.errors import SpecificationError
from service.core.models.registry import FAMILIES, specification_from_dict

PATH = "/v1/models"


@pytest.fixture(scope="module")
def families(client: TestClient) -> list[dict[str, Any]]:
    response = client.get(PATH)
    assert response.status_code == 200
    assert response.headers["content-type"] == "application/json"
    listed: list[dict[str, Any]] = response.json()["families"]
    return listed


def test_every_registered_family_is_listed_once(families: list[dict[str, Any]]) -> None:
    names = [f["family"] for f in families]
    assert sorted(names) == sorted(FAMILIES)
    assert len(set(names)) == len(names)
    assert {"mean", "naive", "seasonal_naive", "drift"} <= set(names)


def test_entries_have_a_summary_parameters_and_constraints(
    families: list[dict[str, Any]],
) -> None:
    for entry in families:
        assert isinstance(entry["summary"], str) and entry["summary"]
        assert isinstance(entry["constraints"], list)
        for parameter in entry["parameters"]:
            assert {"name", "kind", "default", "description"} <= set(parameter)
            if "allowed" in parameter and parameter["default"] is not None:
                assert parameter["default"] in parameter["allowed"], parameter


def test_the_listed_defaults_are_accepted_by_the_registry(
    families: list[dict[str, Any]],
) -> None:
    for entry in families:
        body = {"family": entry["family"]}
        body.update({p["name"]: p["default"] for p in entry["parameters"]})
        try:
            spec = specification_from_dict(body)
        except SpecificationError as exc:
            # Only a list of member specifications has no usable default (a combination).
            assert any(p["kind"] == "specifications" for p in entry["parameters"]), exc
            continue
        assert spec.family == entry["family"]


def test_every_allowed_choice_is_accepted(families: list[dict[str, Any]]) -> None:
    for entry in families:
        for parameter in entry["parameters"]:
            for choice in parameter.get("allowed", []):
                spec = specification_from_dict(
                    {"family": entry["family"], parameter["name"]: choice}
                )
                assert getattr(spec, parameter["name"]) == choice


def test_a_choice_outside_the_allowed_list_is_refused(families: list[dict[str, Any]]) -> None:
    for entry in families:
        for parameter in entry["parameters"]:
            if parameter.get("allowed"):
                with pytest.raises(SpecificationError) as caught:
                    specification_from_dict(
                        {"family": entry["family"], parameter["name"]: "surely-not-allowed"}
                    )
                assert caught.value.problems[0].field == f"model.{parameter['name']}"


def test_the_benchmarks_take_no_parameters(families: list[dict[str, Any]]) -> None:
    by_name = {f["family"]: f for f in families}
    for name in ("mean", "naive", "seasonal_naive", "drift"):
        assert by_name[name]["parameters"] == []


def test_posting_to_the_catalogue_is_a_405_problem(client: TestClient) -> None:
    response = client.post(PATH, json={})
    assert response.status_code == 405
    assert response.headers["content-type"].startswith("application/problem+json")
    assert "GET" in response.headers["allow"]
    assert response.json()["code"] == "method_not_allowed"
