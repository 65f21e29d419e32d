"""Python client for the Lagwise service (depends on ``requests`` only).

>>> from lagwise_client import Lagwise
>>> with Lagwise("http://127.0.0.1:8750") as lw:
...     result = lw.experimental_variogram(x=xs, y=ys, values=vs, lags={"width": 25, "count": 12})
"""

from .client import Lagwise
from .errors import (
    AuthError,
    LagwiseError,
    LimitError,
    MalformedRequestError,
    TransportError,
    UnavailableError,
    ValidationError,
)
from .models import ModelStructure, VariogramModel
from .results import (
    Analysis,
    Candidate,
    CrossValidation,
    DirectionVariogram,
    ExperimentalVariogram,
    ModelFit,
    Predictions,
    VariogramClass,
    VariogramMap,
)
from .retry import RetryPolicy

__version__ = "0.1.0"

__all__ = [
    "Analysis",
    "AuthError",
    "Candidate",
    "CrossValidation",
    "Predictions",
    "ModelFit",
    "ModelStructure",
    "VariogramModel",
    "DirectionVariogram",
    "ExperimentalVariogram",
    "Lagwise",
    "LagwiseError",
    "LimitError",
    "MalformedRequestError",
    "RetryPolicy",
    "TransportError",
    "UnavailableError",
    "ValidationError",
    "VariogramClass",
    "VariogramMap",
]
