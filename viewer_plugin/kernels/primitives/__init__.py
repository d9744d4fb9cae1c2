"""Primitives the feature kernels share, each written once.

* :mod:`.background` -- sigma-clipped background level (``scipy.stats.sigmaclip``
  from a median/MAD start; a compiled row-wise form for per-slice samples);
* :mod:`.chunks` -- depth chunks, and block-by-block float32 results (numpy
  into one preallocated array, dask lazily);
* :mod:`.fitting` -- weighted straight-line fits with and without intercept,
  Student-t intervals, centred and uncentred r², the poor-fit threshold;
* :mod:`.foreground` -- the iterated per-slice foreground profile of one stack;
* :mod:`.gain` -- per-slice gains about an offset, ``(I - offset) * g + offset``;
* :mod:`.matching` -- histogram specification (exact, or by quantiles);
* :mod:`.threshold` -- Otsu's threshold (``skimage.filters.threshold_otsu``) and masks.

The projection, attenuation and bleaching kernels import these; this
package imports none of them.
"""

from .background import Background, background_level, clipped_rows, slice_background

__all__ = ["Background", "background_level", "clipped_rows", "slice_background"]
