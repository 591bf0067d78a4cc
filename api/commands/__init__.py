"""Subcommands of ``tecfleet`` that live in modules of their own: each exposes
``add_parser(sub)``."""
