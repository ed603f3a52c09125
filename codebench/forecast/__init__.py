"""Device forecasts: what a calibrated device's logical qubit would do, and how sure we are.

One job per module:

- :mod:`~codebench.forecast.request`: the typed, checked :class:`ForecastRequest`;
- :mod:`~codebench.forecast.whatif`: ``--improve`` edits of the device;
- :mod:`~codebench.forecast.plan`: the budget in counted work (shots x detectors) and the hard stop;
- :mod:`~codebench.forecast.sampling`: one executor shared by every sweep, sweeps through the engine;
- :mod:`~codebench.forecast.strata`: which numbers of faults to sample, and sampling them;
- :mod:`~codebench.forecast.rare_events`: P(W = w), the failure spectrum, the stratified estimate;
- :mod:`~codebench.forecast.extrapolation`: the raised-noise power law (``--method extrapolated``);
- :mod:`~codebench.forecast.estimators`: per-distance estimates, Lambda, target distances;
- :mod:`~codebench.forecast.breakeven`: against an idle physical qubit;
- :mod:`~codebench.forecast.result` and :mod:`~codebench.forecast.details`: the typed result
  (:class:`ForecastResult`) and its JSON;
- :mod:`~codebench.forecast.render`: table, JSON, CSV and figure;
- :mod:`~codebench.forecast.run`: the orchestration (:func:`forecast`).

Cautions: a model-based projection that uses only what the device file
states. Leakage, crosstalk, correlated and burst errors, non-Markovian noise
and drift are not modelled; measured logical-qubit experiments take precedence.
"""

from __future__ import annotations

from codebench.forecast.breakeven import idle_error
from codebench.forecast.request import (
    DEFAULT_DISTANCES,
    DEFAULT_SEED,
    DEFAULT_TARGETS,
    METHODS,
    ForecastRequest,
)
from codebench.forecast.result import (
    BreakEven,
    BudgetSummary,
    DistanceForecast,
    ForecastResult,
    LambdaStep,
    LambdaSummary,
    TargetForecast,
)
from codebench.forecast.run import CAUTIONS, forecast, run_forecast
from codebench.forecast.whatif import IMPROVABLE, improve_device, parse_improve

__all__ = [
    "CAUTIONS", "DEFAULT_DISTANCES", "DEFAULT_SEED", "DEFAULT_TARGETS", "IMPROVABLE", "METHODS", "BreakEven",
    "BudgetSummary", "DistanceForecast", "ForecastRequest", "ForecastResult", "LambdaStep", "LambdaSummary",
    "TargetForecast", "forecast", "idle_error", "improve_device", "parse_improve", "run_forecast",
]
