"""Subcommands of the ``fieldrate`` command, one module each (see :mod:`service.cli`)."""
