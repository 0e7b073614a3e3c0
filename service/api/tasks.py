"""Request schemas to the workers' tasks: one builder per endpoint, for routes and the CLI.

Every check that can fail on the request alone runs here, in the server, so that a bad
request is a 422 naming its field before any work reaches the pool.
"""

from __future__ import annotations

from service.api.convert import parsed_series, specification
from service.api.schemas.backtests import BacktestRequest
from service.api.schemas.diagnostics import DiagnosticsRequest
from service.api.schemas.forecasts import ForecastRequest
from service.config import Settings
from service.core.checks import check_coverage, check_positive_int
from service.core.data.regressors import regressors_from_wire
from service.core.data.series import ParsedSeries
from service.core.data.timestamps import check_horizon_in_range
from service.core.errors import RequestError, WindvaneError
from service.core.models.transforms import transform_from_value
from service.runtime import jobs


def forecast_task(
    body: ForecastRequest, settings: Settings
) -> tuple[jobs.ForecastTask, ParsedSeries]:
    """The forecast task and the parsed series (its hash goes into the provenance)."""
    series = parsed_series(body.series, settings)
    horizon = check_positive_int(body.horizon, "horizon", settings.max_horizon)
    check_horizon_in_range(series.y.index, horizon)
    coverage = check_coverage(body.coverage)
    periods = series.seasonal_periods
    spec = None if body.model == "auto" else specification(body.model, "model", periods)
    candidates = None
    if body.candidates is not None:
        candidates = tuple(
            specification(c, f"candidates[{i}]", periods) for i, c in enumerate(body.candidates)
        )
    transform = body.transform
    wire_transform = (
        {"kind": transform} if isinstance(transform, str) else transform.model_dump(by_alias=True)
    )
    chosen = transform_from_value(wire_transform)  # a bad transform is a 422 before any work
    if chosen.kind != "none" and not bool((series.y.dropna() > 0).all()):
        raise RequestError(
            f"the {chosen.kind} transform needs strictly positive values", field="transform"
        )
    regressors = None
    if body.regressors:
        if spec is None or spec.family != "arima":
            raise RequestError(
                "regressors are accepted by the arima family only", field="regressors"
            )
        if chosen.kind != "none":
            raise RequestError("regressors cannot be combined with a transform", field="transform")
        wire = [r.model_dump() for r in body.regressors]
        regressors = regressors_from_wire(wire, series.y.index, horizon)
    task = jobs.ForecastTask(
        y=series.y,
        seasonal_period=series.seasonal_period,
        specification=spec,
        horizon=horizon,
        coverage=coverage,
        name=series.name,
        include=tuple(body.include),
        candidates=candidates,
        metric=body.metric,
        transform=wire_transform,
        regressors=regressors,
        seasonal_periods=periods,
        interpolated=series.interpolated,
        lower_bound=body.lower_bound,
        lower_bound_given="lower_bound" in body.model_fields_set,
    )
    return task, series


def diagnostics_task(body: DiagnosticsRequest, settings: Settings) -> jobs.DiagnosticsTask:
    """The diagnostics task; the series keeps its missing values for the core to report."""
    # The core interpolates on its own and says so; it must see which values were missing.
    wire = body.series
    if wire.missing == "interpolate":
        wire = wire.model_copy(update={"missing": "keep"})
    series = parsed_series(wire, settings)
    return jobs.DiagnosticsTask(
        series.y,
        series.seasonal_period,
        body.max_lag,
        "components" in body.include,
        series.seasonal_periods,
    )


def backtest_task(body: BacktestRequest, settings: Settings) -> jobs.BacktestTask:
    """The backtest task: the given specifications, or None for auto's candidates."""
    series = parsed_series(body.series, settings)
    specs = None
    if body.models != "auto":
        if not body.models:
            raise WindvaneError('give at least one specification, or "auto"', field="models")
        specs = tuple(
            specification(m, f"models[{i}]", series.seasonal_periods)
            for i, m in enumerate(body.models)
        )
    return jobs.BacktestTask(
        y=series.y,
        seasonal_period=series.seasonal_period,
        specifications=specs,
        horizon=check_positive_int(body.horizon, "horizon", settings.max_horizon),
        origins=body.origins,
        step=body.step,
        coverage=check_coverage(body.coverage),
        metric=body.metric,
        seasonal_periods=series.seasonal_periods,
        estimation=body.estimation,
    )
