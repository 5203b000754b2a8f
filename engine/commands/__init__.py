"""Sub-commands of the ``shaftwatch`` command line, one module per family."""
