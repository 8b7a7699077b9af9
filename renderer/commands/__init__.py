"""Subcommands of the ``magretina`` CLI, one module each (see :mod:`renderer.cli`)."""
