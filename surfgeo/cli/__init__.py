"""The ``surfgeo`` command line: a thin layer over the Python API."""
