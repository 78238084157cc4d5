"""``python -m benchsuite.runner``: one job from stdin, its fields on stdout (the Dask path)."""

from benchsuite.runner import _stdin_main

_stdin_main()
