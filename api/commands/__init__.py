"""Command-line groups, each with its parser set-up and handlers in a module of its own."""
