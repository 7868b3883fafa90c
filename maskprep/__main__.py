"""`python -m maskprep` runs the command line."""

from .cli import main

main()
