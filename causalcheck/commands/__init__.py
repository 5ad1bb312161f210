"""One module a subcommand; each exposes ``register(subparsers)``.

Shared option helpers live in :mod:`causalcheck.commands.common`. To add a command, write its
module here and add it to ``COMMAND_MODULES`` (the order is the order in ``--help``).
"""

from . import audit, controls, plan, vet, wording

COMMAND_MODULES: tuple = (controls, audit, vet, plan, wording)

__all__ = ["COMMAND_MODULES"]
