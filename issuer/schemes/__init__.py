"""Check-character methods, one module per family, and the registry of their names.

Add a scheme: write a :class:`~issuer.schemes.base.Scheme` subclass in its own module
and list it in ``_SCHEME_CLASSES`` below; the generic tests loop over the registry.
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType

from issuer.alphabets import Alphabet, get_alphabet
from issuer.errors import UnknownName
from issuer.schemes.base import Scheme
from issuer.schemes.crockford import Crockford37Scheme
from issuer.schemes.damm import DammScheme
from issuer.schemes.dihedral import DihedralScheme
from issuer.schemes.iso7064 import (
    Iso7064Mod11_2,
    Iso7064Mod11_10,
    Iso7064Mod27_26,
    Iso7064Mod37_2,
    Iso7064Mod37_36,
    Iso7064Mod97_10,
    Iso7064Mod661_26,
    Iso7064Mod1271_36,
)
from issuer.schemes.luhn import LuhnScheme
from issuer.schemes.none import NoCheckScheme
from issuer.schemes.verhoeff import VerhoeffScheme
from issuer.schemes.weighted import Gs1Scheme, Mod11Scheme

# the order `issuer schemes` lists them in
_SCHEME_CLASSES: tuple[type[Scheme], ...] = (
    LuhnScheme,
    VerhoeffScheme,
    DammScheme,
    DihedralScheme,
    Gs1Scheme,
    Mod11Scheme,
    Crockford37Scheme,
    Iso7064Mod11_2,
    Iso7064Mod11_10,
    Iso7064Mod27_26,
    Iso7064Mod37_2,
    Iso7064Mod37_36,
    Iso7064Mod97_10,
    Iso7064Mod661_26,
    Iso7064Mod1271_36,
    NoCheckScheme,
)

SCHEMES: Mapping[str, type[Scheme]] = MappingProxyType({cls.name: cls for cls in _SCHEME_CLASSES})


def get_scheme(name: str, alphabet: str | Alphabet | None = None) -> Scheme:
    """The scheme ``name`` bound to ``alphabet`` (default: the scheme's natural one).

    Raises :class:`~issuer.errors.UnknownName` or
    :class:`~issuer.errors.UnsupportedAlphabet` with a one-line message.
    """
    try:
        cls = SCHEMES[name]
    except KeyError:
        raise UnknownName(f"unknown scheme {name!r} (known: {', '.join(SCHEMES)})") from None
    if alphabet is None:
        alphabet = cls.natural_alphabet
    if isinstance(alphabet, str):
        alphabet = get_alphabet(alphabet)
    return cls(alphabet)


__all__ = ["SCHEMES", "Scheme", "get_scheme"]
