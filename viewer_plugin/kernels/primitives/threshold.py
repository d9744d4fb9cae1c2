"""Otsu's threshold and the foreground mask it gives.

What it is: Otsu's threshold (the grey level that maximises the
between-class variance of a 256-bin histogram over the values' full range)
by :func:`skimage.filters.threshold_otsu`, on the finite values only and on
at most about two million evenly strided values. The full range is kept
(no percentile clipping of the histogram): structure covering a tiny part of
the field, such as a few fibres entering a slice, must keep a class of its
own; in :func:`otsu_mask` a light Gaussian smoothing first keeps single hot
pixels from stretching the range.

Where it is used: the fixed foreground masks of the bleaching check and the
shared per-slice masks of the two-pass separation (:func:`otsu_mask`), and
the foreground selection of the per-slice foreground profile when the
background has no noise (:func:`otsu_threshold`).
"""

from __future__ import annotations

import numpy as np
from scipy import ndimage
from skimage.filters import threshold_otsu

__all__ = ["otsu_mask", "otsu_threshold"]

#: Values used (at most, evenly strided) for one threshold.
MAX_VALUES = 2_000_000


def otsu_threshold(values: np.ndarray) -> float:
    """Otsu's threshold of the finite *values* (NaN when there are none).

    Parameters
    ----------
    values : array_like
        Any shape; non-finite values are ignored. More than about two
        million values are thinned by an even stride.

    Returns
    -------
    float
        ``skimage.filters.threshold_otsu`` of the values as float64; the
        common value when all values are equal.

    References
    ----------
    .. [1] N. Otsu, "A threshold selection method from gray-level histograms",
       IEEE Trans. SMC 9(1):62-66, 1979; ``skimage.filters.threshold_otsu``.

    Examples
    --------
    >>> otsu_threshold(np.array([1.0] * 50 + [9.0] * 50 + [np.nan])) < 9.0
    True
    """
    flat = np.asarray(values).ravel()
    flat = flat[:: max(1, flat.size // MAX_VALUES)]
    flat = flat[np.isfinite(flat)].astype(np.float64, copy=False)
    if flat.size == 0:
        return float("nan")
    if flat.min() == flat.max():
        return float(flat[0])
    return float(threshold_otsu(flat))


def otsu_mask(image: np.ndarray, *, smooth: float = 1.0) -> np.ndarray:
    """Voxels of *image* above the Otsu threshold of its smoothed copy.

    The threshold and the mask come from a Gaussian-smoothed copy (sigma
    *smooth* voxels on every axis), so that the noise of the image does not
    pick voxels that merely happened to be bright in it (a selection that
    would make later frames look dimmer: regression to the mean).
    All-False for a constant image.

    Examples
    --------
    >>> image = np.zeros((16, 16)); image[4:12, 4:12] = 100.0
    >>> int(otsu_mask(image, smooth=0).sum())
    64
    """
    image = np.asarray(image, dtype=np.float32)
    if smooth > 0:
        image = ndimage.gaussian_filter(image, smooth, mode="nearest")
    threshold = otsu_threshold(image)
    if not np.isfinite(threshold):
        return np.zeros(image.shape, dtype=bool)
    return np.asarray(image > threshold)
