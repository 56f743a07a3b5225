"""The engine's public surface is what ``fitting.__all__`` says, and its docstring lists it.

In the manner of httpx's tests/test_exported_members.py: a name that is public in the
package but missing from ``__all__`` (or the other way round), or missing from the list
in the package docstring, fails here. Common practice, no source beyond that example.
"""

from __future__ import annotations

import re
import types

import fitting


def _public_names() -> set[str]:
    return {k for k, v in vars(fitting).items() if not k.startswith("_") and not isinstance(v, types.ModuleType)}


def test_all_equals_the_public_names():
    assert sorted(fitting.__all__) == sorted(_public_names())
    assert len(set(fitting.__all__)) == len(fitting.__all__)


def test_every_public_name_is_in_the_docstring_list():
    doc = fitting.__doc__ or ""
    missing = [name for name in fitting.__all__ if not re.search(rf"\b{re.escape(name)}\b", doc)]
    assert missing == []


def test_the_docstring_names_the_limits_and_results_newcomers_look_for():
    for name in (
        "MAX_DEGREE",
        "MAX_SEED",
        "fold_labels",
        "holdout_mask",
        "Selection",
        "Table",
        "DropInfo",
        "RankWarning",
    ):
        assert name in fitting.__all__
        assert re.search(rf"\b{name}\b", fitting.__doc__)


def test_the_stable_internal_names_stay_importable():
    from fitting._basis import domain_map, to_window  # noqa: F401
    from fitting._polyfit import (  # noqa: F401
        MODEL_FORMAT,
        MODEL_VERSION,
        PolynomialFit,
        condition_of,
        domain_for_origin,
        fit_polynomial,
        qr_r,
        single_thread_blas,
        t_quantile,
        validate_xyw,
    )
    from fitting._sweep import (  # noqa: F401
        MAX_DEGREE,
        MAX_SEED,
        Block,
        DegreeSweep,
        block_factor,
        cap_degrees,
        holdout_fraction,
        normalise_degrees,
        sweep_degrees,
        sweep_from_blocks,
    )

    assert callable(Block.merge)
    assert MAX_DEGREE == fitting.MAX_DEGREE and MAX_SEED == fitting.MAX_SEED
