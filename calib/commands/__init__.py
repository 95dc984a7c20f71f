"""CLI subcommands, one module each.

Every module here defines ``register(subparsers)``, which adds its subparser and sets
``func=run`` through ``set_defaults``; ``run(args) -> int`` returns the exit code. The CLI discovers
the modules, so adding a command never edits a shared list.
"""
