"""The lifetime models, in one table: a model is one module here and one line in ``MODELS``.

``get_model(name)`` is how the rest of the core finds a model; nothing else branches on model
names. Each model provides what ``base.LifetimeModel`` lists.
"""
from __future__ import annotations

from . import gamma, lognormal, weibull
from .base import LifetimeModel

__all__ = ["DEFAULT_MODEL", "MODELS", "MODEL_NAMES", "LifetimeModel", "get_model"]

MODELS = {
    "gamma": gamma.MODEL,
    "weibull": weibull.MODEL,
    "lognormal": lognormal.MODEL,
}
MODEL_NAMES = tuple(MODELS)
DEFAULT_MODEL = "gamma"


def get_model(name=DEFAULT_MODEL) -> LifetimeModel:
    """The model for a name (case-insensitive); ValueError listing the models otherwise."""
    try:
        return MODELS[str(name).strip().lower()]
    except KeyError:
        raise ValueError(f"model must be one of {', '.join(MODEL_NAMES)} (got {name!r})") from None
