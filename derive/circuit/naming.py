"""How an element name becomes a symbol name."""
from __future__ import annotations


def key_of(name: str) -> str:
    """The symbol name of a (possibly qualified) element name.

    >>> key_of("div1.Rt")
    'div1_Rt'
    """
    return name.replace(".", "_")
