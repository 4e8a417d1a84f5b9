"""Name checks of the request statements against a built circuit."""
from __future__ import annotations

from derive.circuit.naming import key_of
from derive.errors import SheetError
from derive.sheet import quantities
from derive.sheet.expressions import names_in



def _loc(req, what):
    loc = req.name_locs.get(what, req.loc)
    return loc.line, loc.col


def check_requests(c) -> None:
    names = {e.name for e in c.elements}
    for r in c.requests:
        for what in ("port", "port2"):
            p = getattr(r, what)
            if p is not None and p not in c.ports:
                known = ", ".join(sorted(c.ports)) or "none defined"
                raise SheetError(f"unknown port {p!r} (ports: {known})", *_loc(r, what))
        if quantities.quantity(r.quantity).needs_port and r.port is None:
            raise SheetError(f"{r.quantity} needs a port ('at PORT')", r.loc.line, r.loc.col)
        if r.element is not None and r.element not in names:
            raise SheetError(f"unknown element {r.element!r}", *_loc(r, "element"))
        if r.element is not None:
            el = c.element(r.element)
            if el.kind == "nullor":
                raise SheetError(f"the output current of ideal op-amp {r.element!r} is not "
                                 "offered", *_loc(r, "element"))
        if r.source is not None:
            if r.source not in names:
                raise SheetError(f"unknown source {r.source!r}", *_loc(r, "source"))
            if not c.element(r.source).independent_source:
                raise SheetError(f"{r.source!r} is not an independent source", *_loc(r, "source"))
        if r.solve_for is not None and key_of(r.solve_for) not in c.symbols:
            raise SheetError(f"unknown symbol {r.solve_for!r}", *_loc(r, "solve_for"))
        if r.claim is not None:
            for n in names_in(r.claim):
                if key_of(n.name) not in c.symbols and n.name != "s":
                    raise SheetError(f"unknown symbol {n.name!r} in the claim", n.loc.line,
                                     n.loc.col)
