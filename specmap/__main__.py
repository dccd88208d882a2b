"""``python -m specmap`` runs the command line."""

from specmap.cli import main

main()
