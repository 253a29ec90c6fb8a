"""The ``orbweigh`` command: a thin layer over the public Python API."""
