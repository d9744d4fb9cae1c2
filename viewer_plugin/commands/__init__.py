"""Sub-commands of the ``stackdepth`` command line (see :mod:`viewer_plugin.cli`).

Each module defines ``register(subparsers)`` that adds its parser and sets
``func=run``; ``run(args)`` returns the exit status. Only ``view`` imports
napari, and only when it runs.
"""
