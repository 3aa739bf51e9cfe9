"""The register: the only package that imports SQLAlchemy.

Open one with :func:`open_register`; every act is a function taking the register
(writes) or a session from ``register.reading()`` (reads).
"""

from issuer.register.store import Register, open_register

__all__ = ["Register", "open_register"]
