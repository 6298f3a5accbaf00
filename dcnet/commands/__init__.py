"""One module per command: ``add_parser(subparsers)`` registers it and sets ``run``.

To add a command, write ``dcnet/commands/<name>.py`` with ``add_parser`` and ``run(args) -> int``
and add its name to ``COMMANDS``. Import heavy libraries inside ``run``, not at module level.
"""

COMMANDS = ("solve", "check", "layouts", "cycle", "report", "sweep", "spread", "formula", "equivalent")
