"""logitscope: look at a classifier's logits inside the notebook where it was trained.

The softmax over classes is a Boltzmann distribution (logit = minus energy,
``T`` = temperature); class counts of a batch follow a multinomial
distribution. The package has three layers: the data layer
(:class:`LogitFrame`), the analysis layer (:mod:`logitscope.analysis`, pure
numpy) and linked widgets (:mod:`logitscope.widgets`).
"""

from . import analysis
from .demo import load_demo
from .errors import (
    ClassNameError,
    DuplicateError,
    FileFormatError,
    InputTypeError,
    LabelError,
    LogitscopeError,
    NonFiniteError,
    ParameterError,
    ProbabilityError,
    ShapeError,
)
from .frame import LogitFrame, Payload

__version__ = "0.1.0"

__all__ = [
    "ClassNameError",
    "DuplicateError",
    "FileFormatError",
    "InputTypeError",
    "LabelError",
    "LogitFrame",
    "LogitscopeError",
    "NonFiniteError",
    "ParameterError",
    "Payload",
    "ProbabilityError",
    "ShapeError",
    "__version__",
    "analysis",
    "explore",
    "load_demo",
]


def explore(frame: LogitFrame, **options: object) -> object:
    """Open the linked dashboard on ``frame`` (see :class:`logitscope.widgets.Dashboard`)."""
    from .widgets import Dashboard

    return Dashboard(frame, **options)  # type: ignore[arg-type]
