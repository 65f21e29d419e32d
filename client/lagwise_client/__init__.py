"""Python client for the Lagwise service (depends on ``requests`` only).

>>> from lagwise_client import Lagwise
>>> with Lagwise("http://127.0.0.1:8750") as lw:
...     result = lw.experimental_variogram(x=xs, y=ys, values=vs, lags={"width": 25, "count": 12})
"""

from .client import Lagwise
from .errors import (
    AuthError,
    ColumnsError,
    DeadlineError,
    LagwiseError,
    LimitError,
    MalformedRequestError,
    ResponseError,
    TransportError,
    UnavailableError,
    ValidationError,
)
from .families import FAMILIES, Family, Parameter
from .joint import Cokriging, CokrigingCrossValidation, JointFit, JointModel, variables_samples
from .models import ModelStructure, VariogramModel
from .results import (
    Analysis,
    BatchAnalysis,
    Candidate,
    CrossValidation,
    DirectionVariogram,
    ExperimentalVariogram,
    ModelFit,
    Predictions,
    SeveralVariograms,
    VariogramClass,
    VariogramMap,
)
from .retry import RetryPolicy
from .samples import raster_samples, samples_document
from .simulation import Simulation

__version__ = "0.1.0"

__all__ = [
    "FAMILIES",
    "Analysis",
    "AuthError",
    "BatchAnalysis",
    "Candidate",
    "Cokriging",
    "CokrigingCrossValidation",
    "ColumnsError",
    "CrossValidation",
    "DeadlineError",
    "DirectionVariogram",
    "ExperimentalVariogram",
    "Family",
    "JointFit",
    "JointModel",
    "Lagwise",
    "LagwiseError",
    "LimitError",
    "MalformedRequestError",
    "ModelFit",
    "ModelStructure",
    "Parameter",
    "Predictions",
    "ResponseError",
    "SeveralVariograms",
    "RetryPolicy",
    "Simulation",
    "TransportError",
    "UnavailableError",
    "ValidationError",
    "VariogramClass",
    "VariogramMap",
    "VariogramModel",
    "raster_samples",
    "samples_document",
    "variables_samples",
]
