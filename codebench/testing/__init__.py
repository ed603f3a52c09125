"""Conformance suites for every plug-in kind, importable for your own plug-ins.

Each kind has one small interface, a registry by name and a check suite here;
``tests/test_conformance.py`` runs every suite on every registered
implementation, so a new one is checked the moment it is registered. Run the
suite on a plug-in of your own in your tests before naming it in a sweep::

    from codebench.testing import check_decoder, check_noise_model, check_code_family, check_executor

    check_decoder(MyDecoder)                       # codebench.testing.decoders
    check_noise_model(MyNoise, options={...})      # codebench.testing.noise_models
    check_code_family(MyFamily())                  # codebench.testing.code_families
    check_executor(lambda: MyExecutor.create({}))  # codebench.testing.executors

Each ``check_*`` runs every check of its kind; ``*_checks()`` lists the
names and ``run_*_check(name, ...)`` runs one (for parametrized tests).
"""

from __future__ import annotations

from codebench.testing.code_families import (
    check_code_family,
    code_family_checks,
    run_code_family_check,
)
from codebench.testing.decoders import (
    DEFAULT_POINT,
    check_decoder,
    decoder_checks,
    run_decoder_check,
)
from codebench.testing.executors import (
    check_executor,
    executor_checks,
    run_executor_check,
)
from codebench.testing.noise_models import (
    check_noise_model,
    noise_model_checks,
    run_noise_model_check,
)

__all__ = [
    "DEFAULT_POINT",
    "check_code_family",
    "check_decoder",
    "check_executor",
    "check_noise_model",
    "code_family_checks",
    "decoder_checks",
    "executor_checks",
    "noise_model_checks",
    "run_code_family_check",
    "run_decoder_check",
    "run_executor_check",
    "run_noise_model_check",
]
