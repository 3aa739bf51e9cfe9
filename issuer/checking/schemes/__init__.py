"""Check-character methods, one module per family, and the registry of their names.

Add a scheme: write a :class:`~issuer.checking.schemes.base.Scheme` subclass in its own module
and list it in ``_SCHEME_CLASSES`` below; the generic tests loop over the registry.
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType

from issuer.checking.alphabets import Alphabet, get_alphabet
from issuer.checking.schemes.base import Scheme
from issuer.checking.schemes.crockford import Crockford37Scheme
from issuer.checking.schemes.damm import DammScheme
from issuer.checking.schemes.dihedral import DihedralScheme
from issuer.checking.schemes.iso7064 import (
    Iso7064Mod11_2,
    Iso7064Mod11_10,
    Iso7064Mod27_26,
    Iso7064Mod37_2,
    Iso7064Mod37_36,
    Iso7064Mod97_10,
    Iso7064Mod661_26,
    Iso7064Mod1271_36,
)
from issuer.checking.schemes.luhn import LuhnScheme
from issuer.checking.schemes.none import NoCheckScheme
from issuer.checking.schemes.verhoeff import VerhoeffScheme
from issuer.checking.schemes.weighted import Gs1Scheme, Mod11Scheme
from issuer.errors import UnknownName, UnsupportedAlphabet

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
    reason = cls.unsupported_reason(alphabet)
    if reason:
        # the registry names what would serve instead; a scheme alone cannot know
        raise UnsupportedAlphabet(
            f"scheme {name} cannot serve alphabet {alphabet.name} "
            f"({alphabet.size} symbols): {reason}; {_suggestion(alphabet, name)}"
        )
    return cls(alphabet)


def _suggestion(alphabet: Alphabet, refused: str) -> str:
    """What would serve ``alphabet`` instead, as a clause for a one-line refusal."""
    serving = [
        name
        for name, cls in SCHEMES.items()
        if name not in (refused, "none", "luhn") and cls.unsupported_reason(alphabet) is None
    ]
    # name the full-strength choices first; the weaker ones only when nothing else serves
    strong = [n for n in serving if {"single", "adjacent"} <= SCHEMES[n].guaranteed]
    serving = strong or serving
    if not serving:
        return f"for {alphabet.size} symbols only luhn (Luhn mod {alphabet.size}) serves here"
    if len(serving) == 1:
        return f"use {serving[0]} for {alphabet.size} symbols"
    return f"for {alphabet.size} symbols use {', '.join(serving[:-1])} or {serving[-1]}"


__all__ = ["SCHEMES", "Scheme", "get_scheme"]
