"""``python -m framestyle`` runs the command line."""

from .cli import main

main()
