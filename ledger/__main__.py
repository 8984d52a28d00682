"""``python -m ledger`` runs the command line."""

from .cli import main

main()
