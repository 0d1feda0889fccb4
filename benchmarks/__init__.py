"""Validation and performance cases; each module has ``main(argv)`` and a quick mode."""
