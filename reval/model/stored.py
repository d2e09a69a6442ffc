"""A run's fitted model kept in the database (run_models), so one parcel can be revalued later with exactly
the run's curves and coefficients, without a refit (`reval correct`).

The model is pickled without the training sales' weights (they are stored as sale_weights). Reading it back
goes through an unpickler that only builds reval's model classes, numpy arrays and plain Python containers, so
a database from elsewhere cannot make it run anything else (Python's pickle documentation, "Restricting
Globals").
"""
from __future__ import annotations

import dataclasses
import io
import pickle
from typing import Any

from reval.model.hierarchy import FittedHierarchy

FORMAT = "pickle-v1"
_MODULES = ("reval.model.", "reval.data.config", "numpy", "numpy.")
_BUILTINS = {"slice", "tuple", "list", "dict", "set", "frozenset", "complex", "float", "int", "str", "bytes"}


def encode(model: FittedHierarchy) -> tuple[str, bytes]:
    """The stored form of a fitted model: its format name and bytes."""
    return FORMAT, pickle.dumps(dataclasses.replace(model, sale_weights=None), protocol=pickle.HIGHEST_PROTOCOL)


class _ModelUnpickler(pickle.Unpickler):
    def find_class(self, module: str, name: str) -> Any:
        if (module == "builtins" and name in _BUILTINS) or module.startswith(_MODULES) or module == "numpy":
            return super().find_class(module, name)
        raise pickle.UnpicklingError(f"{module}.{name} is not part of a stored model")


def decode(form: str, data: bytes) -> FittedHierarchy:
    """The fitted model from its stored form; ValueError when it cannot be read back."""
    if form != FORMAT:
        raise ValueError(f"unknown stored model format {form!r}")
    try:
        model = _ModelUnpickler(io.BytesIO(data)).load()
    except (pickle.UnpicklingError, AttributeError, ImportError, TypeError, EOFError) as exc:
        raise ValueError(f"the stored model cannot be read back ({exc})") from None
    if not isinstance(model, FittedHierarchy):
        raise ValueError("the stored model is not a fitted valuation model")
    return model
