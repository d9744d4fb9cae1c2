"""The one input-validation helper of stackdepth (part of the shared foundation).

Every public kernel, reader, writer, widget and the command line check their
inputs through the functions here, so that every message has the same form::

    <parameter>: expected <what was expected>, got <what came>

:class:`ParameterError` is a :class:`ValueError`; the command line turns it into
exit status 2 and one line on stderr, the widgets into a napari notification.
"""

from __future__ import annotations

import math
import numbers
from typing import Any, Iterable, NoReturn, Sequence

import numpy as np

__all__ = [
    "ParameterError",
    "fail",
    "check_stack",
    "check_number",
    "check_int",
    "check_choice",
    "check_interval",
    "check_mask",
    "depth_first",
    "float_dtype",
    "is_dask",
]


class ParameterError(ValueError):
    """A parameter of a stackdepth function has a value it cannot use.

    The message names the parameter, what was expected and what came.
    """


def _describe(value: Any) -> str:
    """Short human description of a received value for error messages."""
    if hasattr(value, "shape") and hasattr(value, "dtype"):
        return f"an array of shape {tuple(value.shape)} and dtype {value.dtype}"
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def fail(name: str, expected: str, got: Any, *, hint: str = "") -> NoReturn:
    """Raise :class:`ParameterError` with the project's message form.

    Parameters
    ----------
    name : str
        Name of the parameter, as the user typed it.
    expected : str
        What the parameter must be, in words.
    got : object
        The value received (described, not dumped, when it is an array).
    hint : str, optional
        A suggestion of how to fix it, appended after a semicolon.

    Raises
    ------
    ParameterError
        Always.
    """
    got_text = got if isinstance(got, str) and got.startswith("<") else _describe(got)
    message = f"{name}: expected {expected}, got {got_text}"
    if hint:
        message += f"; {hint}"
    raise ParameterError(message)


def is_dask(array: Any) -> bool:
    """True when *array* is a dask array (without importing dask eagerly)."""
    return type(array).__module__.startswith("dask.")


def check_stack(
    stack: Any,
    *,
    name: str = "stack",
    min_ndim: int = 3,
    axis: int = 0,
    allow_dask: bool = True,
) -> tuple[Any, int]:
    """Check an image stack and normalise the depth axis.

    Parameters
    ----------
    stack : array_like
        A numpy array (or, when *allow_dask*, a dask array) of integers or
        floats. Lists are converted with :func:`numpy.asarray`; arrays are
        never copied or changed.
    name : str
        Parameter name used in messages.
    min_ndim : int
        Smallest accepted number of dimensions (3 for a z-stack).
    axis : int
        The axis along which the kernel works; negative values count from
        the end.

    Returns
    -------
    stack : ndarray or dask array
        The same object (or the :func:`numpy.asarray` view of a sequence).
    axis : int
        *axis* normalised to ``0 <= axis < stack.ndim``.

    Raises
    ------
    ParameterError
        When the stack has too few dimensions, an empty axis, a dtype that is
        not integer or floating point, or *axis* is out of range.
    """
    if not (hasattr(stack, "shape") and hasattr(stack, "dtype")):
        try:
            stack = np.asarray(stack)
        except Exception:  # noqa: BLE001 - any failure is a bad parameter
            fail(name, "an array of numbers", stack)
    if is_dask(stack) and not allow_dask:
        fail(name, "a numpy array", f"<a dask array of shape {tuple(stack.shape)}>",
             hint="call .compute() first")
    if stack.ndim < min_ndim:
        fail(name, f"an array with at least {min_ndim} dimensions (a z-stack)",
             f"<an array of shape {tuple(stack.shape)}>")
    dtype = np.dtype(stack.dtype)
    if dtype.kind not in "uifb":
        fail(name, "an integer or floating-point array", f"<dtype {dtype}>")
    axis = check_int(axis, name="axis")
    if not -stack.ndim <= axis < stack.ndim:
        fail("axis", f"an integer from {-stack.ndim} to {stack.ndim - 1}", axis)
    axis %= stack.ndim
    if any(int(n) == 0 for n in stack.shape):
        fail(name, "an array without empty axes", f"<an array of shape {tuple(stack.shape)}>")
    return stack, axis


def check_number(
    value: Any,
    *,
    name: str,
    low: float | None = None,
    high: float | None = None,
    low_open: bool = False,
    high_open: bool = False,
    allow_inf: bool = False,
) -> float:
    """Check that *value* is a real number inside ``[low, high]``.

    ``low_open`` / ``high_open`` make the bound exclusive. NaN is always
    rejected, infinity unless *allow_inf*.

    Returns
    -------
    float
        The value as a Python float.

    Raises
    ------
    ParameterError
        When the value is not a number or out of range.
    """
    if isinstance(value, bool) or not isinstance(value, (numbers.Real, np.floating, np.integer)):
        fail(name, "a number", value)
    out = float(value)
    if math.isnan(out) or (math.isinf(out) and not allow_inf):
        fail(name, "a finite number", value)
    left = "(" if low_open else "["
    right = ")" if high_open else "]"
    text_range = f"{left}{'-inf' if low is None else low}, {'inf' if high is None else high}{right}"
    if low is not None and (out < low or (low_open and out == low)):
        fail(name, f"a number in {text_range}", value)
    if high is not None and (out > high or (high_open and out == high)):
        fail(name, f"a number in {text_range}", value)
    return out


def check_int(value: Any, *, name: str, low: int | None = None) -> int:
    """Check that *value* is an integer (not a bool), at least *low*."""
    if isinstance(value, bool) or not isinstance(value, (numbers.Integral, np.integer)):
        fail(name, "an integer", value)
    out = int(value)
    if low is not None and out < low:
        fail(name, f"an integer >= {low}", value)
    return out


def check_choice(value: Any, *, name: str, choices: Iterable[str]) -> str:
    """Check that *value* is one of *choices* (case-insensitive strings).

    Returns the matching choice in its canonical spelling.
    """
    options = list(choices)
    if isinstance(value, str):
        for option in options:
            if value.lower() == option.lower():
                return option
    fail(name, "one of " + ", ".join(repr(o) for o in options), value)


def check_interval(
    pair: Any, *, name: str, allow_none: bool = True
) -> tuple[float, float] | None:
    """Check an increasing pair ``(low, high)`` of finite numbers.

    Returns ``None`` for ``None`` when *allow_none*; otherwise the pair as floats.

    Raises
    ------
    ParameterError
        When it is not a pair of finite numbers or ``high <= low``.
    """
    if pair is None and allow_none:
        return None
    if isinstance(pair, (str, bytes)) or not isinstance(pair, (Sequence, np.ndarray)) or len(pair) != 2:
        fail(name, "a pair (low, high) of numbers", pair)
    low = check_number(pair[0], name=f"{name}[0]")
    high = check_number(pair[1], name=f"{name}[1]")
    if high <= low:
        fail(name, "a pair (low, high) with high > low", pair)
    return low, high


def check_mask(mask: Any, shape: Sequence[int], *, name: str = "mask") -> Any:
    """Check that *mask* is ``None`` or broadcastable to *shape*.

    Returns
    -------
    ndarray of bool or None
        The mask as a boolean array (a view when already boolean).
    """
    if mask is None:
        return None
    if not hasattr(mask, "shape"):
        mask = np.asarray(mask)
    try:
        np.broadcast_shapes(tuple(mask.shape), tuple(shape))
    except ValueError:
        fail(name, f"an array broadcastable to {tuple(shape)}", f"<an array of shape {tuple(mask.shape)}>")
    if is_dask(mask):
        return mask.astype(bool)
    mask = np.asarray(mask)
    return mask if mask.dtype == bool else mask != 0


def depth_first(stack: Any, axis: int) -> Any:
    """Return a view of *stack* with *axis* moved to the front (no copy)."""
    if axis == 0:
        return stack
    if is_dask(stack):
        import dask.array as da

        return da.moveaxis(stack, axis, 0)
    return np.moveaxis(stack, axis, 0)


def float_dtype(dtype: Any) -> np.dtype:
    """The float type used for results: float32 stays float32, else float64.

    Integers of 8 and 16 bits and float16/float32 give float32; everything
    else gives float64 (as scikit-image's ``_supported_float_type``).
    """
    dtype = np.dtype(dtype)
    if dtype.kind == "f" and dtype.itemsize >= 8:
        return np.dtype(np.float64)
    if dtype.kind in "ui" and dtype.itemsize >= 4:
        return np.dtype(np.float64)
    return np.dtype(np.float32)
