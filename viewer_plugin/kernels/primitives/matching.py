"""Histogram specification: map grey levels so that their distribution matches a reference.

What it is: a monotone lookup ``x -> y``. Each distinct source value *x*
has a cumulative fraction ``F(x)`` (the fraction of values at or below it)
and is mapped to the reference's value at the same cumulative fraction,
interpolated linearly between the reference's values -- the mapping of
:func:`skimage.exposure.match_histograms`. A distribution is known either

* exactly, from every value of an image (:func:`empirical_cdf`;
  :func:`match_to_cdf` maps an image through its own exact distribution), or
* by quantiles at evenly spaced levels, e.g. of a lateral sample of each
  slice (:func:`row_quantiles`, :func:`quantile_cdf`), which are small
  enough to keep with a result and apply to any block of a large stack
  (:func:`specification_lookup`, :func:`apply_lookup`).

Histogram specification changes the relation between intensities: results
are for display and segmentation, not for measuring intensities.

Where it is used: :func:`~viewer_plugin.kernels.equalise_to_reference`
(exact, frame by frame) and the "quantile" model of
:func:`~viewer_plugin.kernels.estimate_attenuation` /
:func:`~viewer_plugin.kernels.correct_attenuation` (by quantiles).

References: R. C. Gonzalez, R. E. Woods, Digital Image Processing, ch. 3
(histogram matching); ``skimage.exposure.match_histograms``.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "apply_lookup",
    "empirical_cdf",
    "match_to_cdf",
    "quantile_cdf",
    "quantile_levels",
    "row_quantiles",
    "specification_lookup",
]

#: A distribution: distinct (or quantile) values, increasing, and their cumulative fractions.
Cdf = tuple[np.ndarray, np.ndarray]


def _distinct(flat: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Values, counts and the index of each element's value (a table for small unsigned ints)."""
    if flat.dtype.kind == "u" and flat.dtype.itemsize <= 2:
        counts = np.bincount(flat)
        return np.arange(counts.size), counts, flat
    values, index, counts = np.unique(flat, return_inverse=True, return_counts=True)
    return values, counts, index.ravel()


def empirical_cdf(values: np.ndarray) -> Cdf:
    """Distinct values of *values* (float64) and the fraction of values at or below each.

    Examples
    --------
    >>> empirical_cdf(np.array([3, 1, 1, 2], dtype=np.uint8))
    (array([1., 2., 3.]), array([0.5 , 0.75, 1.  ]))
    """
    flat = np.asarray(values).ravel()
    distinct, counts, _ = _distinct(flat)
    present = counts > 0
    return distinct[present].astype(np.float64), np.cumsum(counts)[present] / flat.size


def match_to_cdf(image: np.ndarray, reference: Cdf) -> np.ndarray:
    """*image* mapped so that its histogram matches the distribution *reference* (float64).

    Parameters
    ----------
    image : ndarray
        Any shape; its own exact distribution is used.
    reference : (values, fractions)
        From :func:`empirical_cdf` of the reference image (or any increasing fractions).

    Returns
    -------
    ndarray of float64, the shape of *image*

    Examples
    --------
    >>> source = np.array([[10, 20], [30, 40]])
    >>> match_to_cdf(source, empirical_cdf(np.array([1.0, 2.0, 3.0, 4.0]))).tolist()
    [[1.0, 2.0], [3.0, 4.0]]
    """
    image = np.asarray(image)
    flat = image.ravel()
    _, counts, index = _distinct(flat)
    ref_values, ref_fractions = reference
    table = np.interp(np.cumsum(counts) / flat.size, ref_fractions, ref_values)
    return table[index].reshape(image.shape)


def quantile_levels(n_levels: int) -> np.ndarray:
    """Evenly spaced cumulative fractions from 0 to 1 (the levels of :func:`row_quantiles`)."""
    return np.linspace(0.0, 1.0, n_levels)


def row_quantiles(sample: np.ndarray, n_levels: int) -> np.ndarray:
    """Quantiles of every row of a 2-D sample at :func:`quantile_levels` (float64, NaN ignored)."""
    levels = quantile_levels(n_levels)
    if np.isnan(sample).any():
        out = np.nanquantile(sample, levels, axis=1).T
    else:
        out = np.quantile(sample, levels, axis=1).T
    return np.ascontiguousarray(out, dtype=np.float64)


def quantile_cdf(quantiles: np.ndarray) -> Cdf:
    """The distribution given by quantiles at evenly spaced levels, as distinct values.

    A value that several levels share gets the highest of them (the fraction
    at or below it), as in :func:`empirical_cdf`.

    Examples
    --------
    >>> quantile_cdf(np.array([0.0, 0.0, 5.0, 9.0, 9.0]))
    (array([0., 5., 9.]), array([0.25, 0.5 , 1.  ]))
    """
    quantiles = np.asarray(quantiles, dtype=np.float64)
    levels = quantile_levels(quantiles.size)
    values = np.unique(quantiles)
    last = np.searchsorted(quantiles, values, side="right") - 1
    return values, levels[last]


def specification_lookup(source: Cdf, reference: Cdf) -> tuple[np.ndarray, np.ndarray]:
    """Lookup ``(xs, ys)``: each distinct source value and the reference value at its fraction.

    Examples
    --------
    >>> xs, ys = specification_lookup(quantile_cdf(np.array([0.0, 1.0, 2.0])),
    ...                               (np.array([10.0, 20.0, 30.0]), quantile_levels(3)))
    >>> ys.tolist()
    [10.0, 20.0, 30.0]
    """
    values, fractions = source
    ref_values, ref_fractions = reference
    return values, np.interp(fractions, ref_fractions, ref_values)


def apply_lookup(image: np.ndarray, lookup: tuple[np.ndarray, np.ndarray], out: np.ndarray) -> None:
    """Write *image* mapped through a lookup from :func:`specification_lookup` into *out*.

    Values between the lookup's entries are interpolated linearly; values
    outside them take the end values.
    """
    xs, ys = lookup
    out[...] = np.interp(image, xs, ys)
