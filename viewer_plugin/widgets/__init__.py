"""napari dock widgets of stackdepth.

Widgets only translate between napari layers and the kernels in
:mod:`viewer_plugin.kernels`; every computation lives in a kernel.
"""
