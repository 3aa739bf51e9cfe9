"""``python -m issuer`` runs the command line."""

try:
    from issuer.cli.main import main
except KeyboardInterrupt:  # Ctrl-C before the command line was even loaded
    raise SystemExit(130) from None

main()
