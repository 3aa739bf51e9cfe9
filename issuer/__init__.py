"""issuer: registers of identifier series.

Pure layers (alphabets, schemes, codes, assess, neighbours, scatter) take values and
return values; only :mod:`issuer.register` touches a database and only
:mod:`issuer.cli` touches a terminal.
"""

__version__ = "0.2.0"
