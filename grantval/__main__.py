"""``python -m grantval`` runs the command line."""

from grantval.cli import main

main()
