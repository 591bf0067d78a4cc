"""Sub-commands of ``tecfleet`` that live in modules of their own: each exposes
``add_parser(subparsers)``, which registers the command and its handler."""
