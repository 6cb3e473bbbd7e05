"""``python -m bandpert`` runs the command line."""

from .cli import main

main()
