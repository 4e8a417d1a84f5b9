"""derive: exact symbolic derivations for linear circuits, written up as design-calculation
records.

Notebook use::

    import derive
    rec = derive.derive_text(open("worked/bridge.eqv").read(), "bridge.eqv")
    rec.results[0].quantities["vth"].expr      # a sympy expression
    print(rec.to_json())

The same functions back the command line (``derive record``, ``derive code``,
``derive check``).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Optional

from derive.clock import Clock, running
from derive.errors import DeriveError, NotAvailableYet, SheetError, TooLarge

__version__ = "0.1.0"


@dataclass
class Record:
    """A derived sheet: the circuit and one result per request. ``clock``
    (:class:`derive.clock.Clock`) holds where the time went, phase by phase: the derivation,
    and every export of this record since."""
    circuit: object
    results: list
    digits: int = 4          # significant figures of computed values in every rendering
    clock: Clock = field(default_factory=Clock, repr=False, compare=False)

    def to_json(self) -> str:
        with running(self.clock), self.clock.phase("export"):
            from derive.export.formats import render
            return render(self, "json")

    def to_dict(self) -> dict:
        from derive.export.json_record import record_dict
        return record_dict(self.circuit, self.results)

    def to_markdown(self, template_dir: Optional[str] = None) -> str:
        """The Markdown record (figures are not drawn: their captions stay)."""
        with running(self.clock), self.clock.phase("export"):
            from derive.export.markdown import record_markdown
            return record_markdown(self, template_dir)

    def to_text(self) -> str:
        """The plain-text summary that ``derive record`` prints on a terminal."""
        from derive.export.terminal import record_text
        return record_text(self)

    def to_latex(self) -> str:
        """The LaTeX source of the record."""
        with running(self.clock), self.clock.phase("export"):
            from derive.export.formats import render
            return render(self, "tex")

    def to_pdf(self) -> bytes:
        """The PDF record (needs TeX Live's ``latexmk`` or ``pdflatex``)."""
        with running(self.clock), self.clock.phase("export"):
            from derive.export.formats import render
            return render(self, "pdf")

    def to_code(self, language: str = "c") -> str:
        """The requested closed forms and inverted formulas as C99 (``"c"``) or Python."""
        from derive.export.formats import render_code
        files = render_code(self, language)
        return files["<stdout>"]

    def __repr__(self) -> str:
        sheet = getattr(self.circuit, "sheet", None)
        name = getattr(sheet, "title", None) or getattr(sheet, "filename", None) or "sheet"
        asked = "; ".join(r.request.text for r in self.results)
        return f"<Record of {name!r}: {len(self.results)} result(s): {asked}>"

    def _repr_markdown_(self) -> str:
        """Jupyter: the Markdown record with its figures inline (PNG data URIs)."""
        from derive.export.markdown import record_markdown
        return record_markdown(self, inline_figures=True)


def parse(text: str, filename: str = "<sheet>"):
    """Parse sheet text into the sheet model (:class:`derive.sheet.model.Sheet`)."""
    from derive.sheet.parser import parse_sheet
    return parse_sheet(text, filename)


def circuit_of(text: str, filename: str = "<sheet>"):
    """Parse and build the validated, flattened circuit (its well-posedness decided by the
    solver)."""
    from derive.circuit.build import build_circuit
    from derive.solver.well_posed import check_well_posed
    try:
        c = build_circuit(parse(text, filename))
        check_well_posed(c)
        return c
    except SheetError as e:
        raise e.with_context(text, filename)


def derive_text(text: str, filename: str = "<sheet>", symbolic: Optional[list] = None,
                max_terms: float = 2e6, select=None, digits: int = 4, **options) -> Record:
    """Derive every request of a sheet given as text (with ``select``, a predicate on
    :class:`derive.sheet.model.Request`, only the requests it accepts: ``derive check``
    answers its claims and nothing else).

    ``digits`` is the number of significant figures of computed values in the record (its
    prose, tables, summary and plots; entered values keep the digits they were written
    with): a whole number from 1 to 15, else ``ValueError`` (``derive record --digits``).
    ``options`` are further :class:`derive.analyses.run.Options` fields (``mc_samples``,
    ``mc_seed``, ``mc_distribution`` for tolerance analysis).

    >>> rec = derive_text('''voltage source V between a and gnd = 10 V
    ... resistor R1 between a and b = 1 kohm
    ... resistor R2 between b and gnd = 4 kohm
    ... port out between b and gnd
    ... find thevenin at out''')
    >>> q = rec.results[0].quantities
    >>> q["vth"].expr, q["vth"].value
    (R2*V/(R1 + R2), 8.0)
    >>> q["rth"].expr, q["rth"].value
    (R1*R2/(R1 + R2), 800.0)
    """
    clock = Clock()
    with running(clock):
        with clock.phase("startup"):                  # the pipeline and its libraries
            from derive.analyses.run import Options, run
            from derive.sheet.units import check_digits
        check_digits(digits)
        with clock.phase("parse"):
            c = circuit_of(text, filename)
            if select is not None:
                import dataclasses
                c = dataclasses.replace(c, requests=[r for r in c.requests if select(r)])
        try:
            results = run(c, Options(symbolic=symbolic, max_terms=max_terms, digits=digits,
                                     **options))
        except SheetError as e:
            raise e.with_context(text, filename)
    return Record(c, results, digits, clock)


def derive_file(path: str, **kw) -> Record:
    with open(path, encoding="utf-8") as f:
        return derive_text(f.read(), path, **kw)


__all__ = ["DeriveError", "SheetError", "NotAvailableYet", "TooLarge", "Record", "parse",
           "circuit_of", "derive_text", "derive_file", "__version__"]
