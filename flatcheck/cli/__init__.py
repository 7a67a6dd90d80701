"""The ``flatcheck`` command: a thin shell that parses, calls the core and renders."""
