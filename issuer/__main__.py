"""``python -m issuer`` runs the command line."""

from issuer.cli.app import main

main()
