"""Sub-commands of ``upshot``; each module has ``register(subparsers)``.

Add a command by writing ``service/commands/<name>.py`` with a ``register`` function that
calls ``subparsers.add_parser(...)`` and ``set_defaults(handler=...)``, then listing the
module in :data:`service.cli.COMMANDS`. Import heavy libraries inside the handler so
``upshot --help`` stays fast.
"""

from __future__ import annotations

__all__: list[str] = []
