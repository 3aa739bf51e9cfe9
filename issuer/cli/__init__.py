"""The command-line interface: the only layer that imports Typer and Rich."""
