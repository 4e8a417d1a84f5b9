"""What a design-calculation record shows, ready for the Markdown and LaTeX exporters.

:func:`view` turns a :class:`derive.Record` into plain data: title and notes (user text, left
raw: each exporter escapes it), the element table, modelling assumptions, cautions, the
results summary and every request's steps with their equations as LaTeX lines. Exporters
only lay this out.
"""
from __future__ import annotations

import re

import sympy

from derive.export.printing import equation_lines, to_latex, visual_len
from derive.forms.text import to_text
from derive.sheet import kinds as element_kinds
from derive.sheet import quantities
from derive.sheet.units import DEFAULT_DIGITS, format_bound, format_eng, format_exact, format_value

# Extra-low voltage limits of IEC 61140 (from memory): 50 V a.c. r.m.s., 120 V ripple-free
# d.c. A sheet does not say whether a source is ripple-free, so the lower figure is used.
ELV_LIMIT = 50


def _value_text(v, unit, digits=DEFAULT_DIGITS):
    if v is None:
        return ""
    return format_value(v, unit, digits)


def digits_of(record) -> int:
    """The record's significant figures of computed values (``--digits``)."""
    return getattr(record, "digits", None) or DEFAULT_DIGITS


def exact_eng(value, unit) -> str:
    """An entered (exact rational) value in engineering notation with all of its digits and
    no rounding: 350.7 ohm stays 350.7 Ω, 4.7k stays 4.7 kΩ. A value with no finite decimal
    expansion (an entered fraction such as 1/3) falls back to 4 significant figures.

    >>> import sympy
    >>> exact_eng(sympy.Rational(3507, 10), 'ohm'), exact_eng(sympy.Rational(1, 10**7), 'F')
    ('350.7 Ω', '100 nF')
    >>> exact_eng(sympy.Rational(-47, 1000000), 'A'), exact_eng(sympy.Rational(1, 3), 'V')
    ('-47 µA', '333.3 mV')
    """
    from fractions import Fraction
    return format_exact(Fraction(int(sympy.numer(value)), int(sympy.denom(value))), unit)


def elements(circuit, digits=DEFAULT_DIGITS) -> list:
    rows = []
    nominal = circuit.nominal_values()
    for e in circuit.elements:
        kind = element_kinds.kind(e.kind).word
        if e.dependent:
            kind = "dependent " + kind
        sym = to_latex(e.value) if e.value is not None else ""
        if e.dependent:
            sym = " + ".join(to_latex(c) + r"\cdot " + _ctl(ctl) for c, ctl in e.controls)
        nom = ""
        if e.value is not None:
            v = e.value.xreplace(nominal)
            if v.is_number:
                # the sheet's exact number, with the digits it was entered with
                unit = element_kinds.kind(e.kind).unit
                nom = exact_eng(v, unit) if v.is_Rational else _value_text(float(v), unit, digits)
        info = circuit.symbols.get(e.key)
        tol = ""
        if info is not None and info.tolerance is not None:
            tol = f"±{float(info.tolerance) * 100:g} %"
        rows.append({"name": e.name, "kind": kind, "terminals": ", ".join(e.nodes),
                     "symbol": sym, "nominal": nom, "tolerance": tol})
    return rows


def _ctl(ctl):
    if ctl.kind == "across":
        return r"v(\mathrm{%s}, \mathrm{%s})" % tuple(n.replace("_", r"\_") for n in ctl.nodes)
    return r"i(\mathrm{%s})" % ctl.element.replace("_", r"\_")


def assumptions(circuit) -> list:
    kinds = {e.kind for e in circuit.elements}
    facts = [element_kinds.kind(k) for k in kinds]
    out = ["The circuit is linear and lumped: every element obeys its ideal constitutive law, "
           "wires have no resistance, and nothing couples except through the drawn "
           "connections.",
           "Sources are ideal: a voltage source holds its voltage and a current source its "
           "current whatever the load."]
    if any(k.stamp == "nullor" for k in facts):
        out.append("Op-amps marked ideal have infinite gain, no input current and zero output "
                   "resistance (no voltage between their inputs), and stay in their linear "
                   "range.")
    if any(e.internal and e.dependent for e in circuit.elements):
        out.append("Finite-gain op-amps are modelled by a voltage-controlled source (and "
                   "resistances where given); they stay in their linear range.")
    if any(e.dependent and not e.internal for e in circuit.elements):
        out.append("Dependent sources are small-signal models, valid about their operating "
                   "point.")
    if any(k.reactive for k in facts):
        out.append("Results with s are Laplace-domain transfer functions with zero initial "
                   "conditions.")
    return out


def cautions(circuit) -> list:
    """Cautions for hazardous voltages or stored energy (empty where none apply)."""
    nominal = circuit.nominal_values()
    high = []
    for e in circuit.elements:
        if element_kinds.kind(e.kind).source == "voltage" and e.independent_source \
                and e.value is not None:
            v = e.value.xreplace(nominal)
            if v.is_number and abs(float(v)) > ELV_LIMIT:
                shown = exact_eng(v, 'V') if v.is_Rational else format_value(float(v), 'V')
                high.append(f"{e.name} ({shown})")
    words = " ".join([circuit.sheet.title or ""] + list(circuit.sheet.notes)).lower()
    out = []
    if high:
        out.append("This circuit has sources above extra-low voltage (" + ", ".join(high) +
                   "; limits of 50 V a.c. or 120 V ripple-free d.c. after IEC 61140, from "
                   "memory). Contact with it can injure or kill. This record is a calculation "
                   "only, not a safety assessment: insulation, clearances, creepage, fusing "
                   "and protective earthing must follow the local electrical codes and the "
                   "applicable product standards, and work on it is for qualified persons "
                   "following licensed practice.")
    if any(r.statement == "find" and r.quantity == "stress" for r in circuit.requests):
        out.append("The stress figures are a DC calculation against the ratings entered in "
                   "the sheet. Ratings depend on ambient temperature, mounting and pulse "
                   "conditions: check every part against its datasheet, and where mains or "
                   "high energy is involved defer to the applicable standards and licensed "
                   "practice.")
    if any(w in words for w in ("battery", "batteries", "mains", "cell pack")):
        out.append("Batteries and mains supplies can deliver large fault currents and stored "
                   "energy even at modest voltages: provide overcurrent protection close to "
                   "the source and follow the local codes and the battery maker's handling "
                   "instructions.")
    return out


# A matrix equation is shown whole up to this many unknowns (and while its widest row fits);
# beyond it, as the list of its nonzero entries.
MATRIX_SHOWN = 5
MATRIX_WIDTH = 60


def matrix_lines(lhs, rhs) -> list:
    """``A x = b`` as aligned lines: whole where it is small, else the unknowns, the nonzero
    entries of ``A`` (row by row) and of ``b``.

    >>> import sympy
    >>> a = sympy.Matrix([[1, 0], [0, 2]]); x = sympy.Matrix(sympy.symbols('v_a v_b'))
    >>> len(matrix_lines(sympy.MatMul(a, x, evaluate=False), sympy.Matrix([1, 0])))
    1
    """
    whole = [to_latex(lhs) + " &= " + to_latex(rhs)]
    args = lhs.args if isinstance(lhs, sympy.MatMul) else ()
    if len(args) != 2 or not isinstance(rhs, sympy.MatrixBase):
        return whole
    a, x = args
    if a.shape[0] <= MATRIX_SHOWN and all(
            visual_len(" & ".join(to_latex(c) for c in a.row(i))) <= MATRIX_WIDTH
            for i in range(a.shape[0])):
        return whole
    n = a.shape[0]
    out = [r"\mathbf{A}\,\mathbf{x} &= \mathbf{b}, \quad \mathbf{x} = \left(" +
           ", ".join(to_latex(u) for u in x) + r"\right)^{\mathsf{T}}"
           r"\quad\text{(%d equations; nonzero entries below)}" % n]

    def entry(name, value):
        lines = equation_lines(sympy.Symbol("Q"), value)
        return [name + lines[0][1:]] + lines[1:]
    for i in range(n):
        for j in range(a.shape[1]):
            if a[i, j] != 0:
                out += entry(f"A_{{{i + 1},{j + 1}}}", a[i, j])
    for i in range(n):
        if rhs[i] != 0:
            out += entry(f"b_{{{i + 1}}}", rhs[i])
    return out


def equation_view(eq) -> dict:
    if isinstance(eq.lhs, sympy.MatMul) or isinstance(eq.rhs, sympy.MatrixBase):
        lines = matrix_lines(eq.lhs, eq.rhs)
    elif _long_form(eq.rhs):
        # a closed form of pages: named, not typeset (the closed-form section of the
        # record, or its JSON, has it whole; the check is the same)
        lines = [to_latex(eq.lhs) + r" = \text{(the closed form, %d characters: in full in "
                 r"the JSON record)}" % len(to_text(eq.rhs))]
    else:
        lines = equation_lines(eq.lhs, eq.rhs)
    return {"lines": lines, "verified": bool(eq.verified),
            "verified_by": eq.verified_by if eq.verified else None}


def step_view(st, digits=DEFAULT_DIGITS) -> dict:
    if isinstance(st, dict):
        return {"text": st.get("text", ""), "equations": [], "table": None,
                "verified": bool(st.get("verified")), "kind": "step"}
    table = None
    if st.table:
        table = {"head": [str(c) for c in st.table[0]],
                 "rows": [[str(c) for c in r] for r in st.table[1:]]}
    eqs = [equation_view(e) for e in st.equations]
    return {"text": eng_prose(st.text, digits), "equations": eqs, "table": table,
            "verified": bool(st.verified) and all(e["verified"] for e in eqs), "kind": st.kind}


METHOD_WORDS = [("exact", "exactly (the difference cancels)"),
                ("points", "at random rational points (exact rational arithmetic)"),
                ("system", "against the stamped nodal system")]


def verification_sentence(steps) -> str:
    """How the displayed equations were verified, counted by method (empty if none)."""
    counts: dict = {}
    for s in steps:
        for e in s["equations"]:
            m = e["verified_by"] if e["verified"] else None
            counts[m] = counts.get(m, 0) + 1
    total = sum(counts.values())
    if not total:
        return ""
    parts = [f"{counts[m]} {w}" for m, w in METHOD_WORDS if counts.get(m)]
    head = f"Of the {total} equation{'s' if total != 1 else ''} displayed below, derive checked "
    if parts:
        text = head + (", ".join(parts[:-1]) + " and " + parts[-1] if len(parts) > 1
                       else parts[0])
    else:
        text = f"Of the {total} equation{'s' if total != 1 else ''} displayed below, derive " \
               "checked none"
    n_def = counts.get("definition", 0)
    if n_def:
        text += f"; {n_def} {'are definitions' if n_def != 1 else 'is a definition'} (only " \
                "naming a quantity)"
    n_bad = counts.get(None, 0)
    if n_bad:
        text += f"; {n_bad} {'were' if n_bad != 1 else 'was'} not verified, and the steps " \
                "holding them are not marked verified"
    return text + "."


def quantity_view(q, digits=DEFAULT_DIGITS) -> dict:
    d = {"name": q.name, "latex_name": to_latex(sympy.Symbol(q.name)),
         "value": _value_text(q.value, q.unit, digits), "unit": q.unit}
    if q.expr is not None and not _as_sequence(q):
        d["lines"] = equation_lines(sympy.Symbol(q.name), q.expr)
        d["latex"] = to_latex(q.expr)
        d["long"] = visual_len(d["latex"]) > SHORT_FORM     # not whole in the summary
    else:
        d["long"] = False
        d["lines"] = []
        d["latex"] = None
    d["sequence"] = [equation_lines(s, e) for s, e in q.sequence] \
        if q.expr is None or _as_sequence(q) else []
    return d


RECORD_FORM_CHARS = 4000  # a longer closed form with a sequence is shown as the sequence


def _long_form(e) -> bool:
    """Whether ``e`` prints in more than ``RECORD_FORM_CHARS`` characters."""
    return isinstance(e, sympy.Basic) and not isinstance(e, sympy.MatrixBase) and \
        len(to_text(e)) > RECORD_FORM_CHARS


def _as_sequence(q) -> bool:
    """Whether the Markdown/LaTeX record shows ``q`` as its sequence of named intermediates
    although it has a closed form: where the closed form prints in more than
    ``RECORD_FORM_CHARS`` characters (a page of symbols that no reviewer reads, and that
    costs more to typeset than the rest of the record) and the sequence exists. The JSON
    record keeps both."""
    return bool(q.sequence) and q.expr is not None and _long_form(q.expr)


SHORT_FORM = 45          # closed forms up to this printed width are shown in the summary
_NUMBER_UNIT = re.compile(r"(?<![\w.])(-?\d+(?:\.\d+)?(?:e[+-]?\d+)?)"
                          r"(?: to (-?\d+(?:\.\d+)?(?:e[+-]?\d+)?))? (?=(V|A|Ω|ohm|Hz|F|H)\b)")


def eng_prose(t: str, digits: int = 4) -> str:
    """Raw numbers with a unit in generated prose (``0.00500499 V``, ``2.50125e-06 V``,
    ``-0.0075025 to 0.00250749 V``) in engineering notation with an SI prefix; numbers with
    few digits (``1 A test current``) are left as written.

    >>> eng_prose("= ± 0.00500499 V, so -0.0075025 to 2.50125e-06 V.")
    '= ± 5.005 mV, so -7.502 mV to 2.501 µV.'
    >>> eng_prose("a 1 A test current, 350 Ω, 0.005 V")
    'a 1 A test current, 350 Ω, 5 mV'
    """
    def long(n):
        return "e" in n or len(n.lstrip("-").replace(".", "").strip("0")) > digits

    def one(n, unit):
        if not long(n):       # a short number (an entered value): all of its digits, no more
            from fractions import Fraction
            return format_exact(Fraction(n), unit)
        return format_eng(float(n), unit, digits=digits)

    def sub(m):
        a, b, word = m.group(1), m.group(2), m.group(3)
        unit = "ohm" if word in ("Ω", "ohm") else word
        cut = len(_UNIT_WORD.get(unit, unit))
        def wants(n):
            x = abs(float(n))
            return long(n) or (x != 0 and (x < 0.1 or x >= 1e4))
        if not (wants(a) or (b is not None and wants(b))):
            return m.group(0)
        if b is not None:
            return one(a, unit) + " to " + one(b, unit)[:-cut]
        return one(a, unit)[:-cut]
    return _NUMBER_UNIT.sub(sub, t)


_UNIT_WORD = {"ohm": "Ω"}
_QUANTITY_UNIT = {"vth": "V", "voltage": "V", "isc": "A", "current": "A", "rth": "ohm",
                  "rn": "ohm", "rin": "ohm", "rout": "ohm", "resistance": "ohm"}


def _unit_of(record, name):
    for r in record.results:
        q = r.quantities.get(name)
        if q is not None and q.unit:
            return q.unit
    if name in quantities.QUANTITIES and quantities.unit(name):
        return quantities.unit(name)
    return _QUANTITY_UNIT.get(name)


def _eng(v, unit, digits=DEFAULT_DIGITS):
    return format_value(v, unit, digits) if v is not None else "—"


def _tx(v, unit, digits=DEFAULT_DIGITS) -> str:
    """A value with unit inside math (a true minus sign, the rest upright text)."""
    t = format_value(v, unit, digits)
    return r"-\text{%s}" % t[1:] if t.startswith("-") else r"\text{%s}" % t


def _plain(v, digits=DEFAULT_DIGITS) -> str:
    """A dimensionless figure to ``digits`` significant digits, without an SI prefix."""
    return format_value(v, None, digits)


def _pct(v, digits=DEFAULT_DIGITS) -> str:
    """A computed fraction as a percentage (``0.0123`` -> ``1.23 %``)."""
    return f"{format_value(v * 100, None, digits)} %"


def _frequency_items(record, r, q):
    """f0/ω0/Q, corner, poles and DC gain of a frequency-dependent quantity."""
    f = (r.extra.get("frequency") or {}).get(q.name)
    if not f or q.expr is None:
        return []
    d = digits_of(record)
    parts, plain = [], []
    if f.get("f0_value") is not None:
        parts.append(r"f_0 = \text{%s}" % _eng(f["f0_value"], "Hz", d))
        plain.append(f"f0 = {_eng(f['f0_value'], 'Hz', d)}")
    if f.get("w0_value") is not None:
        parts.append(r"\omega_0 = \text{%s}" % _eng(f["w0_value"], "rad/s", d))
        plain.append(f"ω0 = {_eng(f['w0_value'], 'rad/s', d)}")
    if f.get("Q_value") is not None:
        parts.append(r"Q = %s" % _plain(f["Q_value"], d))
        plain.append(f"Q = {_plain(f['Q_value'], d)}")
    if f.get("f_corner_value") is not None:
        parts.append(r"f_c = \text{%s}" % _eng(f["f_corner_value"], "Hz", d))
        plain.append(f"fc = {_eng(f['f_corner_value'], 'Hz', d)}")
    try:
        # the exact value at s = 0 from the frequency analysis (None: a pole at the origin)
        dc = f.get("dc_gain")
        dc = dc.xreplace(record.circuit.nominal_values()) if dc is not None else None
        if dc is not None and dc.is_number and dc.is_finite:
            ratio = q.unit in ("V/V", "A/A")
            parts.append(r"\text{DC gain} = %s" % _plain(float(dc), d) if ratio else
                         r"\text{at DC} = \text{%s}" % _eng(float(dc), q.unit, d))
            plain.append(f"DC gain = {_plain(float(dc), d)}" if ratio else
                         f"at DC = {_eng(float(dc), q.unit, d)}")
    except (TypeError, ValueError, ZeroDivisionError):
        pass
    poles = f.get("poles_value") or []
    if poles:
        shown, words = [], []
        for p in poles[:4]:
            re_, im = (p[0], p[1]) if isinstance(p, (list, tuple)) else (p, 0)
            txt = _tx(re_, "rad/s", d) if re_ else "0"
            word = _eng(re_, "rad/s", d) if re_ else "0"
            if im:
                txt += r" \pm j\,%s" % _tx(abs(im), "rad/s", d)
                word += f" ± j·{_eng(abs(im), 'rad/s', d)}"
            shown.append(txt)
            words.append(word)
        parts.append(r"\text{poles } s = " + r",\ ".join(dict.fromkeys(shown)))
        plain.append("poles s = " + ", ".join(dict.fromkeys(words)))
    return [{"label": "frequency response", "math": r",\quad ".join(parts), "text": "",
             "plain": ", ".join(plain)}] if parts else []


def _approximation_item(q, digits=DEFAULT_DIGITS) -> dict:
    """The summary line of ``approximately within``: the short form and its bound."""
    a = q.approximation
    pct = lambda v: (f"{format_bound(v * 100, digits)} %" if v < 10 else      # noqa: E731
                     f"{v * 100:,.0f} %".replace(",", " "))      # a bound, rounded up
    how = "proven" if a.get("proven") else f"searched, {a.get('points')} points"
    if a.get("met"):
        form = to_latex(a["expr"])
        math = to_latex(sympy.Symbol(q.name)) + r" \approx " + form \
            if visual_len(form) <= 2 * SHORT_FORM else ""
        return {"label": "approximation", "math": math,
                "plain": f"{q.name} ≈ {to_text(a['expr'])}" if math else "",
                "text": f"relative error at most {pct(a['max_error'])} over the tolerance box"
                        + (" and band" if a.get("band") else "") + " "
                        f"(asked: within {a['within'] * 100:g} %; bound {how})"}
    best = a.get("max_error")
    return {"label": "approximation", "math": "",
            "text": f"no form shorter than the exact one meets {a['within'] * 100:g} %" +
                    (f"; the best of the shortest forms tried is within {pct(best)}"
                     if best is not None else "")}


def _operating_point_items(op, d=DEFAULT_DIGITS) -> list:
    """Summary of ``find operating point``: the counts, the largest dissipation, the balance."""
    power = [(k, v["value"]) for k, v in op["power"].items() if v["value"] is not None]
    items = [{"label": "operating point", "math": "",
              "text": f"{len(op['nodes'])} node voltages, {len(op['currents'])} currents and "
                      f"powers (DC)"}]
    if power:
        k, p = max(power, key=lambda kv: kv[1])
        supplied = -sum(v for _, v in power if v < 0)
        items.append({"label": "power", "math": "", "text":
                      f"sources deliver {_eng(supplied, 'W', d)}; largest absorbed: {k} "
                      f"{_eng(p, 'W', d)}"})
    bal = op.get("balance") or {}
    items.append({"label": "power balance", "math": "", "text":
                  "absorbed powers add to zero (exact)" if bal.get("exact_zero") else
                  "NOT verified"})
    return items


def _stress_items(stress, d=DEFAULT_DIGITS) -> list:
    """Summary of ``find stress``: one verdict per rated quantity."""
    if not stress:
        return [{"label": "stress", "math": "", "text": "no rated element"}]
    items = []
    for key, s in stress.items():
        u = s["unit"]
        items.append({"label": f"stress {key}", "math": "", "text":
                      f"{'ok' if s['ok'] else 'EXCEEDED'}: worst {s['quantity']} "
                      f"{_eng(s['worst'], u, d)} of limit {_standard(s['limit'], u)} "
                      f"({s['use'] * 100:.1f} %)"})      # a share of the limit, as in the table
    return items


def _noise_items(n, d=DEFAULT_DIGITS) -> list:
    """rms over the band, the largest shares and the noise-equivalent bandwidth."""
    lo, hi = n["band"]
    band = f"{_eng(lo, 'Hz', d)} to {_eng(hi, 'Hz', d)}"
    if n.get("rms") is None:
        return [{"label": "noise", "math": "", "text": f"{band}: density in closed form "
                 "only (some symbols have no nominal value)"}]
    top = sorted(n["contributions"].items(), key=lambda kv: -kv[1]["share"])[:3]
    text = f"{_eng(n['rms'], 'V', d)} rms over {band}"
    if top:
        text += "; largest: " + ", ".join(f"{k} {_pct(v['share'], d)}" for k, v in top)
    nb = n.get("noise_bandwidth")
    if nb:
        text += f"; noise-equivalent bandwidth {_eng(nb['value'], 'Hz', d)}"
    return [{"label": "output noise", "math": "", "text": text}]


def request_summary(record, r) -> list:
    """The answer of one request in a few lines: closed form where short, value with unit,
    tolerance band, the three largest sensitivities, verdicts, frequency figures."""
    items = []
    x = r.extra
    d = digits_of(record)
    for q in r.quantities.values():
        name = to_latex(sympy.Symbol(q.name))
        long = q.expr is not None and _long_form(q.expr)      # not typeset to be measured
        form = to_latex(q.expr) if q.expr is not None and not long else None
        math = name + (" = " + form if form and visual_len(form) <= SHORT_FORM else "")
        value = _value_text(q.value, q.unit, d) if q.value is not None else ""
        short = form and visual_len(form) <= SHORT_FORM
        items.append({"label": "inverted formula" if q.form == "inverted" else "",
                      "math": math,
                      "plain": q.name + (f" = {to_text(q.expr)}" if short else ""),
                      "text": ("= " + value) if value else
                      (f"no value: {q.undefined}" if getattr(q, "undefined", None) else
                       "no value (symbolic)") +
                      (", closed form below" if form and visual_len(form) > SHORT_FORM
                       else ", as named intermediates below" if long and _as_sequence(q)
                       else ", closed form below" if long else "")})
        items += _frequency_items(record, r, q)
        if getattr(q, "approximation", None):
            items.append(_approximation_item(q, d))
    if "valid_range" in x and x["valid_range"]:
        rng = x["valid_range"][0]
        unit = (x.get("measured") or {}).get("unit")
        if rng.get("low_value") is not None and rng.get("high_value") is not None:
            items.append({"label": "valid for", "math": "", "text":
                          f"{_eng(rng['low_value'], unit, d)} < measured value < "
                          f"{_eng(rng['high_value'], unit, d)}"})
    if "spread" in x:
        name = x.get("tolerance_of", "")
        unit = _unit_of(record, name)
        sp = x["spread"]
        txt = f"{_eng(sp['low'], unit, d)} to {_eng(sp['high'], unit, d)} (extreme values, " \
              f"nominal {_eng(sp['nominal'], unit, d)})"
        rss = x.get("rss")
        if rss:
            txt += f"; RSS {_eng(rss['low'], unit, d)} to {_eng(rss['high'], unit, d)}"
        items.append({"label": "tolerance band", "math": to_latex(sympy.Symbol(name)) if name
                      else "", "plain": name, "text": txt})
    if "sensitivities" in x:
        sens = sorted(x["sensitivities"].items(),
                      key=lambda kv: (kv[1].get("rank") or 1e9, kv[0]))[:3]
        parts = [f"{k} {_plain(v['value'], d)}" for k, v in sens
                 if v.get("value") is not None]
        of = x.get("sensitivity_of") or "Q"
        items.append({"label": f"largest normalized sensitivities (x/{of})(d{of}/dx)",
                      "math": "", "text": ", ".join(parts)})
    items += review_items(x, d)
    if "operating_point" in x:
        items += _operating_point_items(x["operating_point"], d)
    if "stress" in x:
        items += _stress_items(x["stress"], d)
    if "noise" in x:
        items += _noise_items(x["noise"], d)
    if x.get("within"):                 # check ... within E%: the bound and its method
        w = x["within"]
        items.append({"label": "claim", "math": "", "text": w["verdict"]})   # with its method
    elif "holds" in x:
        if x["holds"]:
            verdict = "holds (exact)"
        elif x["holds"] is False:
            verdict = "does not hold" + (f": {x['diagnosis']}" if x.get("diagnosis") else "")
        else:
            verdict = "undecided"
        items.append({"label": "claim", "math": "", "text": verdict})
    return items


def review_items(x, d=DEFAULT_DIGITS) -> list:
    """Summary lines of ``find drift of``, ``find budget of`` and ``choose`` results."""
    items = []
    if "drift" in x:
        dr, unit = x["drift"], x["drift"].get("unit")
        ppm = dr.get("ppm_per_K")
        items.append({"label": "drift over temperature", "math": "", "text":
                      f"{_eng(dr['low'], unit, d)} at {dr['at_low']:.{d}g} °C to "
                      f"{_eng(dr['high'], unit, d)} at {dr['at_high']:.{d}g} °C (nominal "
                      f"{_eng(dr['nominal'], unit, d)}"
                      + (f", {_plain(ppm, d)} ppm/K at T0)" if ppm is not None else ")")})
    if "budget" in x:
        b, unit = x["budget"], x["budget"].get("unit")
        items.append({"label": "tolerance and drift budget", "math": "", "text":
                      f"{_eng(b['low'], unit, d)} to {_eng(b['high'], unit, d)} (extreme values, "
                      f"nominal {_eng(b['nominal'], unit, d)}); RSS ± {_eng(b['rss'], unit, d)} "
                      "(first order)"})
    if "choice" in x:
        c, unit = x["choice"], x["choice"].get("unit")
        vals = ", ".join(f"{k} = {_standard(v, c.get('units', {}).get(k))}"
                         for k, v in c["values"].items())
        items.append({"label": f"standard values ({c['series']})", "math": "", "text":
                      f"{vals}: {_eng(c['result'], unit, d)} for the target "
                      f"{_eng(c['target'], unit, d)} (relative error {c['error']:.{max(d - 1, 0)}e})"})
    return items


def _standard(v, unit) -> str:
    """A preferred (series) value with the digits of its series (4.87 kΩ, 100 nF), or a
    stress limit, the exact rating × derating (125 mW)."""
    from fractions import Fraction
    return format_exact(Fraction(repr(float(v))), unit)


def standard_values(record) -> dict:
    """Element name -> the standard value(s) ``choose`` requests give its symbol (text)."""
    out: dict = {}
    for r in record.results:
        chosen = r.extra.get("standard_values") or {}
        for e in record.circuit.elements:
            if isinstance(e.value, sympy.Symbol) and str(e.value) in chosen:
                unit = element_kinds.kind(e.kind).unit
                out.setdefault(e.name, []).append(_standard(chosen[str(e.value)], unit))
    return {k: " / ".join(dict.fromkeys(v)) for k, v in out.items()}


def view(record) -> dict:
    c = record.circuit
    d = digits_of(record)
    results = []
    for r in record.results:
        figs = r.extra.get("figures") or []
        results.append({"request": r.request.text, "notes": list(r.notes),
                        "summary": request_summary(record, r),
                        "quantities": [quantity_view(q, d) for q in r.quantities.values()],
                        "steps": [step_view(s, d) for s in r.steps],
                        "figures": list(figs)})
    all_steps = [s for r in results for s in r["steps"]]
    rows, std = elements(c, d), standard_values(record)
    for e in rows:              # the "with standard values" column, where any is chosen
        e["standard"] = std.get(e["name"], "")
    return {"title": c.sheet.title or "Design calculation", "notes": list(c.sheet.notes),
            "elements": rows, "standard_column": bool(std), "assumptions": assumptions(c), "cautions": cautions(c),
            "results": results,
            "closed_forms": any(q["long"] and q["lines"] for r in results
                                for q in r["quantities"]),
            "all_verified": all(s["verified"] for s in all_steps),
            "n_equations": sum(len(s["equations"]) for s in all_steps),
            "verification": verification_sentence(all_steps)}
