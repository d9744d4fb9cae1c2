"""napari dock widgets of stackdepth.

The docks only translate between napari layers and the jobs in
:mod:`viewer_plugin.jobs` (which call the kernels); they share one base,
:class:`~viewer_plugin.widgets._dock.StackDock`.
"""
