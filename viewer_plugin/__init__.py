"""stackdepth: depth analysis of fluorescence microscopy z-stacks.

The import package is deliberately light: importing :mod:`viewer_plugin` or
:mod:`viewer_plugin.kernels` never imports napari, Qt or magicgui.
"""

__version__ = "0.1.0"

__all__ = ["__version__"]
