"""Sub-commands of the ``pwsolid`` command line beyond the ground state (layer 6).

Each module here defines ``register(subparsers)``, which adds its sub-command
with ``parser.set_defaults(handler=run)``; ``run(args) -> int`` returns an exit
code from ``pwsolid.errors`` and raises ``InputError`` for user mistakes (the
main command line turns that into exit code 3 and one clear message). Modules
are found automatically and listed in alphabetical order.
"""
