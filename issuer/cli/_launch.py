"""How this process was launched. The console script sets ``only_command`` before the
app is imported, so that only the module defining that command loads; anything that
imports the app otherwise (tests, integrators) gets every command."""

from __future__ import annotations

only_command: str | None = None
