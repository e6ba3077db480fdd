"""``python -m aquitardmap`` runs the command line."""

from aquitardmap.cli import main

main()
