"""``python -m issuer`` runs the command line."""

from issuer.cli.main import main

main()
