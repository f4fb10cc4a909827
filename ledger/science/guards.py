"""Argument guards shared by the science modules (they raise DomainError naming the parameter)."""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING

from ledger.errors import DomainError, out_of_range

if TYPE_CHECKING:  # numpy loads only where arrays are used: scalar modules stay light
    import numpy as np
    from numpy.typing import NDArray


def finite(name: str, value: float) -> float:
    """Return ``value`` as float; refuse NaN, infinity and non-numbers."""
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise DomainError(
            f"{name} = {value!r} is not a number", field=name, value=value, expected="a number"
        ) from None
    if not math.isfinite(x):
        raise out_of_range(name, value, "a finite number")
    return x


def positive(name: str, value: float) -> float:
    """Return ``value`` if finite and > 0."""
    x = finite(name, value)
    if x <= 0:
        raise out_of_range(name, value, "a value greater than zero")
    return x


def non_negative(name: str, value: float) -> float:
    """Return ``value`` if finite and >= 0."""
    x = finite(name, value)
    if x < 0:
        raise out_of_range(name, value, "a value of zero or more")
    return x


def within(name: str, value: float, low: float, high: float, expected: str) -> float:
    """Return ``value`` if finite and low <= value <= high."""
    x = finite(name, value)
    if not low <= x <= high:
        raise out_of_range(name, value, expected)
    return x


def series(
    name: str, values: Sequence[float] | NDArray[np.float64], minimum: int
) -> NDArray[np.float64]:
    """Return ``values`` as a 1-D float array of at least ``minimum`` finite entries."""
    import numpy as np

    arr = np.asarray(values, dtype=float).ravel()
    if arr.size < minimum:
        raise DomainError(
            f"{name} has {arr.size} value(s); at least {minimum} are needed",
            field=name,
            value=arr.size,
            expected=f"at least {minimum} values",
        )
    if not np.all(np.isfinite(arr)):
        raise out_of_range(name, "non-finite entry", "finite numbers only")
    return arr


def whole(name: str, value: float, minimum: int = 1) -> int:
    """Return ``value`` as int if it is a whole number of at least ``minimum``."""
    x = finite(name, value)
    if x != int(x) or x < minimum:
        raise DomainError(
            f"{name} = {value!r} is not a whole number of {minimum} or more",
            field=name,
            value=value,
            expected=f"a whole number, {minimum} or more",
        )
    return int(x)


def paired(
    x_name: str,
    x: Sequence[float] | NDArray[np.float64],
    y_name: str,
    y: Sequence[float] | NDArray[np.float64],
    minimum: int,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Two series of equal length (at least ``minimum`` finite values each), as float arrays."""
    xa = series(x_name, x, minimum)
    ya = series(y_name, y, minimum)
    if xa.size != ya.size:
        raise DomainError(
            f"{y_name} has {ya.size} values but {x_name} has {xa.size}",
            field=y_name,
            value=int(ya.size),
            expected=f"{xa.size} values, one per {x_name}",
        )
    return xa, ya
