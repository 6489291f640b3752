"""Tables derived from a device model, worked out once per model object while it lives.

A board repeats its parts: 64 devices may share eight models. The layers above the models
(connectivity, the virtual board, the checks) each derive tables from a model and would ask
again for every instance; `per_model` keeps one result per model object, weakly, so output
stays the same and nothing outlives the models.
"""

from __future__ import annotations

import weakref
from typing import Callable, Generic, TypeVar

from .device import DeviceModel

__all__ = ["per_model"]

T = TypeVar("T")


class _PerModel(Generic[T]):
    def __init__(self, compute: Callable[[DeviceModel], T]):
        self._compute = compute
        self._known: weakref.WeakKeyDictionary[DeviceModel, T] = weakref.WeakKeyDictionary()

    def __call__(self, device: DeviceModel) -> T:
        found = self._known.get(device)
        if found is None:
            found = self._known[device] = self._compute(device)
        return found


def per_model(compute: Callable[[DeviceModel], T]) -> Callable[[DeviceModel], T]:
    """`compute(device)`, remembered per device model object (a decorator)."""
    return _PerModel(compute)
