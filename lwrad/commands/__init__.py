"""Subcommands of the ``lwrad`` command line, one module each (see :mod:`lwrad.cli`)."""

__all__: list[str] = []
