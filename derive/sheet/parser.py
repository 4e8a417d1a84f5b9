"""Sheet text -> :class:`derive.sheet.model.Sheet`.

The grammar (``sheet.lark``) gives a lark tree; this module turns it into the model objects,
checks what can be checked without building the circuit (duplicates, units, reserved names)
and turns every lark error into a :class:`SheetError` with a plain-words message.

>>> sheet = parse_sheet("resistor R1 between a and gnd = 4k7\\nfind rth at p\\n")
>>> sheet.elements[0].value.quantity.value
Fraction(4700, 1)
"""
from __future__ import annotations

import re
from fractions import Fraction
from typing import Optional

from lark import Token, Tree
from lark.exceptions import UnexpectedCharacters, UnexpectedEOF, UnexpectedInput, UnexpectedToken

from derive.errors import SheetError, lexer_lines
from derive.sheet import kinds, quantities
from derive.sheet.grammar import describe_syntax_error, get_parser
from derive.sheet.model import BinOp, Block, Call, Derating, E_SERIES, Element, Loc, Name, Neg, Nominal, Num, Numeric, OpAmp, Port, Quantity, Replacement, Request, Sheet, Temperature, Tolerance, Use, Value
from derive.sheet.units import UnitError, parse_attribute, parse_number, parse_quantity, parse_temperature

RESERVED = frozenset({"s"})
FUNCTIONS = {"sqrt": 1, "across": 2, "through": 1}
# values the parser reads besides element values (whose facts are in derive.sheet.kinds):
# an op-amp's gain (no unit) and a nominal line (any unit; R47 / 47R read as resistor codes)
_OTHER_VALUES = ("opamp-gain", "nominal")
_R_CODE_NAME = re.compile(r"R\d+\Z")
_ASCII_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*(\.[A-Za-z_][A-Za-z0-9_]*)*\Z")
RATING_ATTR = {"W": "power_rating", "V": "voltage_rating"}


def _unit_of(kind: str):
    """The unit word a value of ``kind`` is in (None: a plain number or any unit)."""
    return None if kind in _OTHER_VALUES else kinds.kind(kind).unit


def _resistor_code(kind: str) -> bool:
    """Whether R47 / 47R in a value of ``kind`` are IEC 60062 resistor codes."""
    return kind == "nominal" or (kind not in _OTHER_VALUES and kinds.kind(kind).resistor_code)


def _show(value: Fraction) -> str:
    """An exact number for a message: ``25``, ``-40``, ``26.85``."""
    if value.denominator == 1:
        return str(value.numerator)
    return f"{float(value):.6g}"


def parse_sheet(text: str, filename: str = "<sheet>") -> Sheet:
    """Parse sheet text into a :class:`Sheet`; every problem is a :class:`SheetError`."""
    try:
        return _Builder(text, filename).build()
    except SheetError as e:
        raise e.with_context(text, filename)


MAX_NESTING = 100        # parentheses nested in one expression
MAX_OPERATORS = 400      # operators in one line (a longer sum is split with 'nominal' lines)
_STRING_OR_COMMENT = re.compile(r'"(\\.|[^"\\\r\n])*"|#[^\r\n]*')


def _check_nesting(source: str) -> None:
    """Refuse expressions nested or chained too deeply to be handled, before parsing.
    (Unary signs and powers are operators too, so a chain of them is bounded as well.)

    >>> _check_nesting("resistor R between a and b = ((1))")
    >>> _check_nesting("resistor R between a and b = " + "(" * 101 + "1" + ")" * 101)
    Traceback (most recent call last):
    ...
    derive.errors.SheetError: <sheet>:1:130: error: the expression nests more than 100 levels deep
    """
    for lineno, line in enumerate(lexer_lines(source), 1):
        code = _STRING_OR_COMMENT.sub(lambda m: " " * len(m.group(0)), line)
        depth = ops = 0
        for col, ch in enumerate(code, 1):
            if ch == "(":
                depth += 1
                if depth > MAX_NESTING:
                    raise SheetError(f"the expression nests more than {MAX_NESTING} levels "
                                     "deep", lineno, col)
            elif ch == ")":
                depth = max(depth - 1, 0)
            elif ch in "+-*/^|\u2225":
                ops += 1
                if ops > MAX_OPERATORS:
                    raise SheetError(f"the line has more than {MAX_OPERATORS} operators",
                                     lineno, col, hint="split a long expression with "
                                     "'nominal' lines or intermediate elements")


MAX_DIGITS = 40          # digits in one written number
MAX_MAGNITUDE = Fraction(10) ** 30   # nonzero values must lie in [1e-30, 1e30]
_NUMBER_PARTS = re.compile(r"(\d*)(?:\.(\d*))?(?:[eE]([+-]?\d+))?")


def _check_number_text(tok) -> None:
    """Refuse numbers whose digits or exponent are too long to convert safely (before the
    exact conversion, which would otherwise build an enormous integer)."""
    m = _NUMBER_PARTS.match(str(tok))
    digits = len(m.group(1) or "") + len(m.group(2) or "")
    if digits > MAX_DIGITS:
        raise _err(f"the number has more than {MAX_DIGITS} digits", tok)
    exp = m.group(3)
    if exp is not None and (len(exp.lstrip("+-")) > 3 or abs(int(exp)) > 60):
        raise _err(f"the exponent e{exp} is out of range (at most e±60)", tok)


def _check_magnitude(value, tok) -> None:
    if value and not (1 / MAX_MAGNITUDE <= abs(value) <= MAX_MAGNITUDE):
        raise _err("the value is outside the range this tool handles (1e-30 to 1e30 in "
                   "magnitude)", tok)


MAX_EXPONENT = 1000      # a power's constant exponent
MAX_BITS = 20000         # bits of an exact constant built from powers


def _const(node):
    """The exact value of a constant expression tree (None where it has a name or call);
    a power is only evaluated after :func:`_check_power` has bounded it."""
    if isinstance(node, Num):
        return node.value
    if isinstance(node, Neg):
        v = _const(node.operand)
        return None if v is None else -v
    if not isinstance(node, BinOp):
        return None
    a, b = _const(node.left), _const(node.right)
    if a is None or b is None:
        return None
    if node.op == "+":
        return a + b
    if node.op == "-":
        return a - b
    if node.op == "*":
        return a * b
    if node.op == "/":
        return a / b if b else None
    if node.op == "||":
        return a * b / (a + b) if a + b else None
    if b.denominator != 1 or (a == 0 and b < 0):
        return None
    return a ** int(b)


def _check_power(node) -> None:
    """Refuse powers whose exact value or expansion would run away (``10^10^10``)."""
    exp = _const(node.right)
    where = (node.loc.line, node.loc.col)
    if exp is None:
        return
    if abs(exp) > MAX_EXPONENT:
        raise SheetError(f"the exponent {float(exp):.6g} is too large (at most "
                         f"{MAX_EXPONENT})", *where)
    base = _const(node.left)
    if base is not None and exp.denominator == 1 and base:
        bits = max(base.numerator.bit_length(), base.denominator.bit_length())
        if bits * abs(int(exp)) > MAX_BITS:
            raise SheetError("the power is too large to handle exactly", *where)


def _loc(item) -> Loc:
    if isinstance(item, Token):
        return Loc(item.line, item.column)
    return Loc(item.meta.line, item.meta.column)


def _err(message: str, where, hint: Optional[str] = None) -> SheetError:
    loc = where if isinstance(where, Loc) else _loc(where)
    return SheetError(message, loc.line, loc.col, hint=hint)


def _unescape(token: Token) -> str:
    body = str(token)[1:-1]
    return re.sub(r'\\(["\\])', r"\1", body)


class _Scope:
    """Names declared in one scope (the sheet or one block)."""

    def __init__(self, what: str):
        self.what = what
        self.parts: dict[str, Loc] = {}
        self.nominals: dict[str, Loc] = {}

    def declare(self, table: dict, name: str, loc: Loc, noun: str):
        if name in table:
            first = table[name]
            raise _err(f"duplicate {noun} '{name}' {self.what} (first defined on line "
                       f"{first.line})", loc)
        table[name] = loc


class _Builder:
    def __init__(self, text: str, filename: str):
        self.text = text
        self.filename = filename
        self.deferred: list = []        # (owner, attribute, Value, Name-or-token, kind)
        self.choose_targets: list = []  # (Request, target tree) of 'choose' lines
        self.declared: set[str] = set()

    # ------------------------------------------------------------------ driver
    def build(self) -> Sheet:
        source = self.text[1:] if self.text.startswith("\ufeff") else self.text
        if not source.endswith("\n"):
            source += "\n"
        self.src = source
        _check_nesting(source)
        try:
            tree = get_parser().parse(source)
        except UnexpectedInput as e:
            raise describe_syntax_error(e, source, get_parser()) from None
        sheet = Sheet(source=self.text, filename=self.filename)
        top = _Scope("in the sheet")
        ports: dict[str, Loc] = {}
        for stmt in tree.children:
            kind = stmt.data
            if kind == "title":
                if sheet.title is not None:
                    raise _err("'title' is given twice; a sheet has one title", stmt)
                sheet.title = _unescape(stmt.children[1])
            elif kind == "note":
                sheet.notes.append(_unescape(stmt.children[1]))
            elif kind == "ground":
                if sheet.ground is not None:
                    raise _err("'ground' is given twice; a sheet has one reference node", stmt)
                sheet.ground, sheet.ground_loc = self._ref(stmt.children[1])
            elif kind in ("element", "vsource", "isource", "opamp", "use", "nominal"):
                item = self._body_item(stmt, top)
                if isinstance(item, Nominal):
                    sheet.nominals.append(item)
                else:
                    sheet.body.append(item)
                    (sheet.uses if isinstance(item, Use) else sheet.elements).append(item)
            elif kind == "port":
                port = self._port(stmt)
                top.declare(ports, port.name, port.loc, "port")
                sheet.ports.append(port)
            elif kind == "block":
                block = self._block(stmt)
                if block.name in sheet.blocks:
                    first = sheet.blocks[block.name].loc
                    raise _err(f"duplicate block '{block.name}' (first defined on line "
                               f"{first.line})", stmt.children[1])
                sheet.blocks[block.name] = block
            elif kind in ("find", "solve", "check", "choose"):
                sheet.requests.append(self._request(stmt))
            elif kind == "temperature":
                if sheet.temperature is not None:
                    raise _err("'temperature' is given twice; a sheet has one temperature "
                               f"line (first on line {sheet.temperature.loc.line})", stmt)
                sheet.temperature = self._temperature(stmt)
            elif kind == "derating":
                if sheet.derating is not None:
                    raise _err("'derating' is given twice; a sheet has one derating line "
                               f"(first on line {sheet.derating.loc.line})", stmt)
                sheet.derating = self._derating(stmt)
            elif kind == "replace":
                refs = [self._ref(t) for t in stmt.children if isinstance(t, Tree)]
                compare = any(isinstance(t, Token) and t.type == "COMPARE"
                              for t in stmt.children)
                sheet.replacements.append(Replacement(*(r[0] for r in refs), compare,
                                                      _loc(stmt), tuple(r[1] for r in refs)))
            elif kind == "numeric":
                refs = [self._ref(t) for t in stmt.children[1:]]
                sheet.numeric.append(Numeric(tuple(r[0] for r in refs),
                                             tuple(r[1] for r in refs), _loc(stmt)))
        if not sheet.body:
            raise SheetError("sheet has no elements", 1, 1,
                             hint="add at least one line such as: resistor R1 between a and gnd")
        self._resolve_codes()
        self._check_gain_targets(sheet)
        return sheet

    # ------------------------------------------------------------------ names
    def _name(self, token: Token, noun: str, qualified: bool = False) -> str:
        name = str(token)
        if not _ASCII_NAME.match(name):
            raise _err(f"'{name}' is not a valid {noun} name: use ASCII letters, digits and _",
                       token)
        if "." in name and not qualified:
            raise _err(f"a {noun} name cannot contain '.': '{name}'", token)
        return name

    def _symbol_name(self, token: Token, noun: str) -> str:
        name = self._name(token, noun)
        if name in RESERVED:
            raise _err(f"'{name}' is reserved for the Laplace variable and cannot name "
                       f"a {noun}", token)
        return name

    def _ref(self, node) -> tuple[str, Loc]:
        token = node.children[0] if isinstance(node, Tree) else node
        return self._name(token, "node", qualified=True), _loc(token)

    # ------------------------------------------------------------------ statements
    def _body_item(self, stmt: Tree, scope: _Scope):
        kind = stmt.data
        if kind == "opamp":
            item = self._opamp(stmt)
        elif kind == "use":
            item = self._use(stmt)
            scope.declare(scope.parts, item.instance, _loc(stmt.children[2]), "name")
            return item
        elif kind == "nominal":
            item = self._nominal(stmt)
            scope.declare(scope.nominals, item.name, _loc(stmt.children[1]), "nominal")
            self.declared.add(item.name)
            return item
        else:
            item = self._element(stmt)
        scope.declare(scope.parts, item.name, _loc(stmt.children[1 if kind == "element"
                                                                  else 2]), "name")
        self.declared.add(item.name)
        return item

    def _element(self, stmt: Tree) -> Element:
        ch = stmt.children
        if stmt.data == "element":
            kind, name_tok, rest = str(ch[0]), ch[1], ch[2:]
        else:
            kind, name_tok, rest = str(stmt.data), ch[1], ch[2:]
        noun = kinds.kind(kind).word
        name = self._symbol_name(name_tok, noun)
        (n1, l1), (n2, l2) = self._ref(rest[0]), self._ref(rest[1])
        element = Element(kind, name, (n1, n2), (l1, l2), None, _loc(stmt))
        for part in rest[2:]:
            if part.data == "assign":
                element.value = self._value(part, kind, noun, element, "value")
            else:
                self._attribute(element, part, noun)
        return element

    # ------------------------------------------------------------------ attributes (section 5)
    def _attribute(self, element: Element, node: Tree, noun: str) -> None:
        word = node.children[0]
        article = "an" if noun[0] in "aeiou" else "a"
        if node.data == "noiseless":
            if kinds.kind(element.kind).noise is None:
                raise _err(f"'noiseless' is for resistors (and conductances, impedances, "
                           f"admittances), not {article} {noun}", word,
                           hint="only resistors and conductances make thermal noise in the "
                                "noise analysis")
            if element.noiseless:
                raise _err(f"'noiseless' is given twice for '{element.name}'", word)
            element.noiseless = True
            element.attr_locs["noiseless"] = _loc(word)
        elif node.data == "tc":
            value, unit, loc = self._attr_quantity(node.children[1])
            if unit != "1/K":
                raise _err(f"a temperature coefficient is in ppm/K, not "
                           f"{unit or 'a plain number'}", self._unit_loc(node.children[1]),
                           hint="for example: tc 100 ppm/K")
            if element.tc is not None:
                raise _err(f"'tc' is given twice for '{element.name}'", word)
            element.tc = value
            element.attr_locs["tc"] = loc
        else:                                   # rated
            allowed = kinds.kind(element.kind).rating_units
            if not allowed:
                raise _err(f"{article} {noun} takes no rating", word,
                           hint="ratings are for resistors (W and/or V), capacitors and "
                                "inductors (V)")
            if "rated" in element.attr_locs:
                raise _err(f"'rated' is given twice for '{element.name}'", word,
                           hint="give both ratings of a resistor at once: rated 0.25 W 200 V")
            element.attr_locs["rated"] = _loc(word)
            for q in node.children[1:]:
                value, unit, loc = self._attr_quantity(q)
                if unit not in allowed:
                    shown = unit or "a plain number"
                    want = " or ".join(allowed)
                    hint = ("a resistor is rated in W (power) and/or V (voltage): "
                            "rated 0.25 W 200 V" if "W" in allowed else
                            f"{article} {noun} is rated in V (the voltage across it): "
                            "rated 50 V")
                    raise _err(f"{article} {noun}'s rating is in {want}, not {shown}",
                               self._unit_loc(q), hint=hint)
                attr = RATING_ATTR[unit]
                if getattr(element, attr) is not None:
                    raise _err(f"the {attr.split('_')[0]} rating of '{element.name}' is "
                               "given twice", loc)
                if value <= 0:
                    raise _err("a rating must be more than zero", loc)
                setattr(element, attr, value)
                element.attr_locs[attr] = loc

    def _opamp_noise(self, opamp: OpAmp, node: Tree) -> None:
        word = node.children[0]
        if opamp.attr_locs.get("noise") is not None:
            raise _err(f"'noise' is given twice for op-amp '{opamp.name}'", word)
        opamp.attr_locs["noise"] = _loc(word)
        for q in node.children[1:]:
            value, unit, loc = self._attr_quantity(q)
            attr = {"V/rtHz": "voltage_noise", "A/rtHz": "current_noise"}.get(unit)
            if attr is None:
                raise _err(f"an op-amp noise density is in V/rtHz or A/rtHz, not "
                           f"{unit or 'a plain number'}", self._unit_loc(q),
                           hint="for example: noise 4 nV/rtHz and 0.5 pA/rtHz")
            if getattr(opamp, attr) is not None:
                what = attr.split("_")[0]
                raise _err(f"two {what} noise densities for op-amp '{opamp.name}'", loc,
                           hint="give one voltage (nV/rtHz) and one current (pA/rtHz) "
                                "density")
            if value < 0:
                raise _err("a noise density cannot be negative", loc)
            setattr(opamp, attr, value)
            opamp.attr_locs[attr] = loc

    def _attr_parts(self, node: Tree):
        """(sign token or None, number token, word token or None, per token or None)."""
        sign = number = word = per = None
        for c in node.children:
            if isinstance(c, Tree):
                per = c.children[1]
            elif c.type in ("PLUS", "MINUS"):
                sign = c
            elif c.type == "NUMBER":
                number = c
            else:
                word = c
        return sign, number, word, per

    def _unit_loc(self, node: Tree) -> Loc:
        """Where the unit of an attribute quantity is written (for a wrong-unit error)."""
        sign, number, word, per = self._attr_parts(node)
        if word is not None:
            return _loc(word)
        text = str(number)
        m = re.match(r"(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?", text)
        if m and m.end() < len(text):
            return Loc(number.line, number.column + m.end())
        return _loc(per) if per is not None else _loc(number)

    def _located_unit_error(self, e: UnitError, node: Tree) -> SheetError:
        sign, number, word, per = self._attr_parts(node)
        if e.part == "word" and word is not None:
            return _err(e.message, word, hint=e.hint)
        if e.part == "per" and per is not None:
            return _err(e.message, per, hint=e.hint)
        if e.part == "number" and e.offset:
            return SheetError(e.message, number.line, number.column + e.offset, hint=e.hint)
        return _err(e.message, node, hint=e.hint)

    def _attr_quantity(self, node: Tree):
        """An ``attr_qty`` as (exact value, canonical unit, Loc)."""
        sign, number, word, per = self._attr_parts(node)
        _check_number_text(number)
        try:
            value, unit = parse_attribute(str(number), None if word is None else str(word),
                                          None if per is None else str(per))
        except UnitError as e:
            raise self._located_unit_error(e, node) from None
        _check_magnitude(value, number)
        if sign is not None and sign.type == "MINUS":
            value = -value
        return value, unit, _loc(node)

    # ------------------------------------------------------------------ settings (section 5)
    def _temperature_of(self, node: Tree):
        sign, number, word, per = self._attr_parts(node)
        _check_number_text(number)
        if per is not None:
            raise _err("a temperature is in C or K", per,
                       hint="for example: temperature 25 C from -40 C to 85 C")
        try:
            value = parse_temperature(str(number), None if word is None else str(word),
                                      negative=sign is not None and sign.type == "MINUS")
        except UnitError as e:
            raise self._located_unit_error(e, node) from None
        _check_magnitude(value, number)
        return value, _loc(node)

    def _temperature(self, stmt: Tree) -> Temperature:
        qs = [c for c in stmt.children if isinstance(c, Tree)]
        t0, l0 = self._temperature_of(qs[0])
        if len(qs) == 1:
            return Temperature(t0, t0, t0, _loc(stmt), l0)
        (low, l1), (high, l2) = self._temperature_of(qs[1]), self._temperature_of(qs[2])
        if low > high:
            raise _err(f"the range is written from low to high: {_show(low)} C is above "
                       f"{_show(high)} C", l1)
        if not low <= t0 <= high:
            raise _err(f"the nominal temperature {_show(t0)} C is outside the range "
                       f"{_show(low)} C to {_show(high)} C", l0,
                       hint="the range must contain the nominal temperature")
        return Temperature(t0, low, high, _loc(stmt), l0, l1)

    def _percent(self, tok: Token, has_percent: bool, what: str, example: str) -> Fraction:
        number = self._number(tok)
        if number.form != "plain":
            raise _err(f"{what} is a plain number before '%', e.g. {example}", tok)
        if not has_percent:
            raise SheetError(f"{what} is a percentage: write '%' after the number",
                             tok.line, tok.column + len(str(tok)), hint=f"for example: {example}")
        return number.value / 100

    def _derating(self, stmt: Tree) -> Derating:
        ch = stmt.children
        value = self._percent(ch[1], len(ch) > 2, "a derating", "derating 60%")
        if not 0 < value <= 1:
            raise _err("a derating is more than 0% and at most 100%", ch[1])
        return Derating(value, _loc(stmt))

    def _opamp(self, stmt: Tree) -> OpAmp:
        ch = stmt.children
        name = self._name(ch[1], "op-amp")
        refs = [self._ref(t) for t in ch[2:5]]
        opamp = OpAmp(name, (refs[0][0], refs[1][0]), refs[2][0], tuple(r[1] for r in refs),
                      None, None, None, _loc(stmt))
        for opt in ch[5:]:
            if opt.data == "opamp_noise":
                self._opamp_noise(opamp, opt)
                continue
            word = str(opt.children[0])
            if getattr(opamp, word) is not None:
                raise _err(f"'{word}' is given twice for op-amp '{name}'", opt.children[0])
            kind = "opamp-gain" if word == "gain" else "impedance"
            value = self._value_of(opt.children[1], None, kind, f"op-amp {word}", opamp, word)
            setattr(opamp, word, value)
        return opamp

    def _nominal(self, stmt: Tree) -> Nominal:
        ch = stmt.children
        name = self._symbol_name(ch[1], "nominal value")
        tol = ch[3] if len(ch) > 3 else None
        value = self._value_of(ch[2], tol, "nominal", "nominal", None, None)
        if isinstance(value.expr, Name) and _R_CODE_NAME.match(value.expr.name):
            code = Quantity(Fraction("0." + value.expr.name[1:]), None, value.loc)
            value = Value(code, None, value.tolerance, value.loc)
        if value.quantity is None:
            raise _err(f"nominal '{name}' needs a number, e.g. nominal {name} = 10 kohm",
                       ch[2], hint="a nominal value cannot be an expression")
        return Nominal(name, value.quantity, value.tolerance, _loc(stmt))

    def _port(self, stmt: Tree) -> Port:
        ch = stmt.children
        name = self._name(ch[1], "port")
        (p, lp), (m, lm) = self._ref(ch[2]), self._ref(ch[3])
        return Port(name, p, m, (lp, lm), _loc(stmt))

    def _block(self, stmt: Tree) -> Block:
        ch = stmt.children
        name = self._name(ch[1], "block")
        terminals = []
        seen: dict[str, Loc] = {}
        for ref in ch[2].children:
            term, loc = self._ref(ref)
            if term in seen:
                raise _err(f"duplicate terminal '{term}' in block '{name}'", loc)
            seen[term] = loc
            terminals.append(term)
        scope = _Scope(f"in block '{name}'")
        body = [self._body_item(item, scope) for item in ch[3:]
                if isinstance(item, Tree)]
        return Block(name, tuple(terminals), body, _loc(stmt))

    def _use(self, stmt: Tree) -> Use:
        ch = stmt.children
        block = self._name(ch[1], "block")
        instance = self._name(ch[2], "instance")
        refs = [self._ref(t) for t in ch[3].children]
        mappings: dict = {}
        mapping_locs: dict = {}
        for m in ch[4:]:
            if not isinstance(m, Tree):
                continue                      # the WITH keyword
            target = self._symbol_name(m.children[0], "symbol")
            if target in mappings:
                raise _err(f"'{target}' is mapped twice in 'use {block} {instance}'",
                           m.children[0])
            expr = m.children[1]
            if expr.data == "num_word":       # with Rt = 10 kohm: the unit only checked
                value, _unit = self._quantity(expr.children[0], expr.children[1])
                mappings[target] = Num(value, _loc(expr))
            else:
                mappings[target] = self._expr(expr)
            mapping_locs[target] = _loc(m.children[0])
        return Use(block, instance, tuple(r[0] for r in refs), tuple(r[1] for r in refs),
                   mappings, mapping_locs, _loc(stmt))

    # ------------------------------------------------------------------ requests
    def _request(self, stmt: Tree) -> Request:
        ch = stmt.children
        statement = str(stmt.data)
        text = " ".join(self.src[stmt.meta.start_pos:stmt.meta.end_pos].split())
        analysis = None
        rest = ch[1:]
        if statement == "find" and isinstance(rest[0], Token):
            first = rest[0]
            if first.type in ("OPERATING", "STRESS"):
                word = "operating_point" if first.type == "OPERATING" else "stress"
                return Request(statement, word, text, _loc(stmt))
            if first.type == "NOISE":
                return self._noise_request(stmt, text, rest)
            analysis, rest = str(rest[0]), rest[1:]
        response = response_loc = None
        if rest and isinstance(rest[0], Tree) and rest[0].data == "response":
            response = self._response(analysis, rest[0])
            response_loc = _loc(rest[0].children[0])
            rest = rest[1:]
        if statement == "choose":
            return self._choose(stmt, text, rest)
        req = Request(statement, "", text, _loc(stmt), analysis=analysis, response=response)
        if response_loc is not None:
            req.name_locs["response"] = response_loc
        self._quantity_phrase(req, rest[0])
        if response is not None and len(quantities.members(req.quantity)) != 1:
            raise _err(f"'{response} of' takes a single quantity; '{req.quantity}' gives "
                       f"{quantities.quantity(req.quantity).said}", rest[0].children[0],
                       hint=f"name one of them, e.g. find {analysis} of {response} of gain "
                            "from Vin to out")
        if len(rest) > 1 and isinstance(rest[1], Tree) and rest[1].data == "approx":
            self._approx(req, rest[1])
            return req
        if statement == "solve":
            target, loc = self._ref(rest[1])
            if target in RESERVED:
                raise _err(f"cannot solve for '{target}': it is the Laplace variable", loc)
            req.solve_for = target
            req.name_locs["solve_for"] = loc
        elif statement == "check":
            req.claim = self._expr(rest[1])
            if len(rest) > 2 and isinstance(rest[2], Tree) and rest[2].data == "claim_within":
                self._claim_within(req, rest[2])
        return req

    def _claim_within(self, req: Request, node: Tree) -> None:
        """``check Q equals EXPR within E% [from F1 to F2]``: the bound and band."""
        self._bound(req, node, node.children[0], node.children[1],
                    "check gain from Vin to out equals -R2/R1 within 1%")

    def _bound(self, req: Request, node: Tree, word, number, example: str) -> None:
        """The error bound ``within E%`` (0 < E < 100 %) and the optional band of ``node``
        into ``req`` (shared by ``approximately within`` and ``check … within``)."""
        has_percent = any(isinstance(c, Token) and c.type == "PERCENT" for c in node.children)
        within = self._percent(number, has_percent, "the error bound", example)
        if not 0 < within < 1:
            raise _err("the error bound is more than 0% and less than 100%", number)
        req.within = within
        req.name_locs["within"] = _loc(word)
        band = [c for c in node.children if isinstance(c, Tree)]
        if band:
            req.band = self._band(band[0])
            req.name_locs["band"] = _loc(band[0])

    def _response(self, analysis: str, node: Tree) -> str:
        """``f0``/``w0``/``Q`` of ``find ANALYSIS of f0 of Q``: the analyses that take it."""
        tok = node.children[0]
        word = {"F0": "f0", "W0": "w0", "QFACTOR": "Q"}[tok.type]
        if not quantities.accepts(analysis, word):
            took = " and ".join(f"'find {a} of'" for a in quantities.ANALYSES
                                if quantities.accepts(a, word))
            raise _err(f"'{word} of' is taken by {took}, not by 'find {analysis} of'", tok,
                       hint=f"for example: find tolerance of {word} of gain from Vin to out")
        return word

    def _noise_request(self, stmt: Tree, text: str, rest) -> Request:
        req = Request("find", "noise", text, _loc(stmt))
        req.port, req.name_locs["port"] = self._ref(rest[1])
        if len(rest) < 3:
            raise _err("'find noise' needs a frequency band", rest[0],
                       hint=f"for example: find noise at {req.port} from 10 Hz to 100 kHz")
        req.band = self._band(rest[2])
        req.name_locs["band"] = _loc(rest[2])
        return req

    def _band(self, node: Tree) -> tuple:
        ends = []
        for q in node.children:
            value, unit, loc = self._attr_quantity(q)
            if unit not in (None, "Hz"):
                raise _err(f"a frequency is in Hz, not {unit}", self._unit_loc(q))
            if value < 0:
                raise _err("a frequency cannot be negative", loc)
            ends.append((value, loc))
        (low, l1), (high, _) = ends
        if low >= high:
            raise _err(f"the band is written from low to high: {_show(low)} Hz is not below "
                       f"{_show(high)} Hz", l1)
        return (low, high)

    def _approx(self, req: Request, node: Tree) -> None:
        word, number = node.children[0], node.children[2]
        if req.analysis is not None:
            raise _err(f"'approximately' goes with a plain 'find' of a quantity, not with "
                       f"'find {req.analysis} of'", word,
                       hint="for example: find gain from Vin to out approximately within 1%")
        self._bound(req, node, word, number, "approximately within 1%")

    def _choose(self, stmt: Tree, text: str, rest) -> Request:
        req = Request("choose", "", text, _loc(stmt))
        refs = [c for c in rest if isinstance(c, Tree) and c.data == "ref"]
        symbols, locs = [], []
        for ref in refs:
            name, loc = self._ref(ref)
            if name in RESERVED:
                raise _err(f"cannot choose '{name}': it is the Laplace variable", loc)
            if name in symbols:
                raise _err(f"'{name}' is named twice in 'choose'", loc)
            symbols.append(name)
            locs.append(loc)
        req.symbols, req.symbol_locs = tuple(symbols), tuple(locs)
        series_tok = next(c for c in rest if isinstance(c, Token))
        series = str(series_tok)
        if series not in E_SERIES:
            hint = (f"write {series.upper()}" if series.upper() in E_SERIES else
                    "the IEC 60063 series are " + ", ".join(E_SERIES))
            raise _err(f"unknown series '{series}'", series_tok, hint=hint)
        req.series = series
        req.name_locs["series"] = _loc(series_tok)
        q, target = [c for c in rest if isinstance(c, Tree) and c.data != "ref"]
        self._quantity_phrase(req, q)
        if not quantities.accepts("choose", req.quantity):
            raise _err(f"'choose' needs a single quantity; '{req.quantity}' gives "
                       f"{quantities.quantity(req.quantity).said}", q.children[0],
                       hint="name one of them, e.g. choose R2 from E24 for vth at out = 1 V")
        value, unit, loc = self._attr_quantity(target)
        want = quantities.unit(req.quantity)
        if unit is not None and req.quantity != "gain" and unit != want:
            raise _err(f"the target is in {unit} but {req.quantity} is in {want}",
                       self._unit_loc(target))
        req.target = Quantity(value, unit, loc)
        req.name_locs["target"] = loc
        self.choose_targets.append((req, target))
        return req

    def _check_gain_targets(self, sheet: Sheet) -> None:
        """A ``choose ... for gain from S to P = X`` target with a unit: per volt of a
        voltage source the gain is a plain ratio, per ampere of a current source it is in
        ohm.  (A source not found at the top level is left to the circuit stage.)"""
        of_source = {e.name: e.kind for e in sheet.elements if isinstance(e, Element)}
        for req, node in self.choose_targets:
            if req.quantity != "gain" or req.target.unit is None:
                continue
            kind = of_source.get(req.source)
            per = kinds.kind(kind).gain_unit if kind is not None else None
            # per volt of a voltage source a plain ratio (no unit); not a source: left as is
            want = req.target.unit if per is None else (None if per == "V/V" else per)
            if req.target.unit != want:
                if want is None:
                    raise _err(f"the gain from voltage source '{req.source}' is a plain "
                               f"ratio (V/V), not {req.target.unit}", self._unit_loc(node),
                               hint="give the target without a unit, e.g. = 10")
                raise _err(f"the gain from current source '{req.source}' is in ohm (V/A), "
                           f"not {req.target.unit}", self._unit_loc(node))

    def _quantity_phrase(self, req: Request, q: Tree) -> None:
        word = str(q.children[0])
        req.quantity = word
        refs = [self._ref(t) for t in q.children[1:]]
        slots = quantities.quantity(word).slots
        for slot, (value, loc) in zip(slots, refs):
            setattr(req, slot, value)
            req.name_locs[slot] = loc

    # ------------------------------------------------------------------ values
    def _value(self, assign: Tree, kind, noun, owner, attr) -> Value:
        tol = assign.children[1] if len(assign.children) > 1 else None
        return self._value_of(assign.children[0], tol, kind, noun, owner, attr)

    def _value_of(self, node, tol_node, kind, noun, owner, attr) -> Value:
        """A value: a quantity (number, unit, sign) or an expression, plus a tolerance."""
        expected = _unit_of(kind)
        sign, inner = 1, node
        while isinstance(inner, Tree) and inner.data in ("neg", "pos"):
            sign = -sign if inner.data == "neg" else sign
            inner = inner.children[1]
        quantity = None
        rcode_name = None
        if isinstance(inner, Tree) and inner.data in ("num", "num_word"):
            tok = inner.children[0]
            word = inner.children[1] if inner.data == "num_word" else None
            if word is None:
                number = self._number(tok)
                if number.form == "rcode":
                    at = len(number.number_text)
                    if not _resistor_code(kind):
                        raise self._missing_star(tok, None, "R", at)
                    if kind != "nominal":
                        rcode_name = Name("R", Loc(tok.line, tok.column + at))
            value, unit = self._quantity(tok, word, missing_star=(inner.data == "num_word"))
            self._check_unit(unit, kind, noun, word or tok)
            quantity = Quantity(sign * value, unit, _loc(node))
        tolerance = self._tolerance(tol_node, quantity.unit if quantity else None,
                                    expected, kind) if tol_node is not None else None
        if quantity is not None:
            value = Value(quantity, None, tolerance, _loc(node))
            if rcode_name is not None:
                self.deferred.append((owner, attr, value, rcode_name, "rcode"))
            return value
        expr = self._expr(node)
        value = Value(None, expr, tolerance, _loc(node))
        if (kind != "nominal" and _resistor_code(kind) and isinstance(expr, Name)
                and _R_CODE_NAME.match(expr.name)):
            self.deferred.append((owner, attr, value, expr, "name"))
        return value

    def _check_unit(self, unit, kind, noun, where):
        if unit is None:
            return
        if kind == "opamp-gain":
            raise _err(f"an op-amp gain takes no unit, not {unit}", where)
        expected = _unit_of(kind)
        if kind != "nominal" and unit != expected:
            article = "an" if noun[0] in "aeiou" else "a"
            raise _err(f"{article} {noun}'s value is in {expected}, not {unit}", where)

    def _tolerance(self, node: Tree, unit, expected, kind) -> Tolerance:
        ch = node.children
        tok = ch[1]
        word = ch[2] if len(ch) > 2 and isinstance(ch[2], Tree) else None
        word_tok = word.children[0] if word is not None else None
        percent = isinstance(ch[-1], Token) and ch[-1].type == "PERCENT"
        loc = _loc(node)
        if percent:
            number = self._number(tok)
            if number.form != "plain" or word_tok is not None:
                raise _err("a relative tolerance is a plain number before '%', e.g. ±1%", tok)
            return Tolerance(number.value / 100, True, None, loc)
        value, tol_unit = self._quantity(tok, word_tok)
        if tol_unit is not None:
            want = unit or expected
            if want is not None and tol_unit != want and kind not in ("nominal",):
                raise _err(f"the tolerance is in {tol_unit} but the value is in {want}",
                           word_tok or tok)
            if kind == "nominal" and unit is not None and tol_unit != unit:
                raise _err(f"the tolerance is in {tol_unit} but the value is in {unit}",
                           word_tok or tok)
        return Tolerance(value, False, tol_unit, loc)

    # ------------------------------------------------------------------ numbers
    def _number(self, tok: Token):
        _check_number_text(tok)
        try:
            number = parse_number(str(tok))
        except UnitError as e:
            raise self._unit_error(e, tok, None) from None
        _check_magnitude(number.value, tok)
        return number

    def _quantity(self, tok: Token, word: Optional[Token], missing_star: bool = False):
        _check_number_text(tok)
        value, unit = self._quantity_of(tok, word, missing_star)
        _check_magnitude(value, tok)
        return value, unit

    def _quantity_of(self, tok: Token, word: Optional[Token], missing_star: bool = False):
        if word is not None and missing_star:
            try:
                return parse_quantity(str(tok), str(word))
            except UnitError as e:
                if e.part == "word" and e.kind == "unknown":
                    raise self._missing_star(tok, word, str(word)) from None
                raise self._unit_error(e, tok, word) from None
        try:
            return parse_quantity(str(tok), None if word is None else str(word))
        except UnitError as e:
            raise self._unit_error(e, tok, word) from None

    def _unit_error(self, e: UnitError, tok: Token, word: Optional[Token]) -> SheetError:
        if e.part == "word" and word is not None:
            return _err(e.message, word, hint=e.hint)
        if e.kind == "unknown" and e.offset:
            return self._missing_star(tok, None, str(tok)[e.offset:], e.offset, e.message)
        return SheetError(e.message, tok.line, tok.column + e.offset, hint=e.hint)

    def _missing_star(self, tok, word, name, offset=0, why=None) -> SheetError:
        number = str(tok)[:offset] if offset else str(tok)
        line, col = (word.line, word.column) if word is not None else (tok.line,
                                                                        tok.column + offset)
        message = f"missing '*' between the number {number} and '{name}'"
        if why:
            message = f"{why}; {message}"
        return SheetError(message, line, col, hint=f"write {number}*{name} for a product")

    # ------------------------------------------------------------------ expressions
    def _expr(self, node):
        if isinstance(node, Token):
            raise _err(f"unexpected '{node}'", node)   # pragma: no cover - grammar guards
        kind = node.data
        ch = node.children
        if kind == "num":
            number = self._number(ch[0])
            if number.form == "rcode":
                raise self._missing_star(ch[0], None, "R", len(number.number_text))
            if number.unit is not None:
                raise _err(f"a unit ({number.suffix}) is only allowed on a plain value, not "
                           f"inside an expression", ch[0],
                           hint="write the number without its unit")
            return Num(number.value, _loc(ch[0]))
        if kind == "num_word":
            number = self._number(ch[0])
            raise self._missing_star(ch[0], ch[1], str(ch[1]))
        if kind == "name":
            name = self._name(ch[0], "symbol", qualified=True)
            return Name(name, _loc(ch[0]))
        if kind == "group":
            return self._expr(ch[1])
        if kind == "neg":
            return Neg(self._expr(ch[1]), _loc(ch[0]))
        if kind == "pos":
            return self._expr(ch[1])
        if kind == "binop":
            op = "||" if ch[1].type == "PAR" else str(ch[1])
            out = BinOp(op, self._expr(ch[0]), self._expr(ch[2]), _loc(ch[1]))
            if op == "^":
                _check_power(out)
            return out
        if kind == "call":
            return self._call(node)
        raise _err(f"unexpected {kind}", node)           # pragma: no cover

    def _call(self, node: Tree) -> Call:
        func_tok, args_tree = node.children[0], node.children[2]
        func = str(func_tok)
        if func not in FUNCTIONS:
            raise _err(f"unknown function '{func}' (known: sqrt, across, through)", func_tok,
                       hint=f"for a product write {func}*(...)")
        args = args_tree.children
        want = FUNCTIONS[func]
        if len(args) != want:
            plural = "s" if want > 1 else ""
            raise _err(f"{func}(...) takes {want} argument{plural}, not {len(args)}", func_tok)
        if func == "sqrt":
            return Call(func, (self._expr(args[0]),), _loc(func_tok))
        names = []
        for arg in args:
            if not (isinstance(arg, Tree) and arg.data == "name"):
                what = "node" if func == "across" else "element"
                raise _err(f"the arguments of {func}(...) must be {what} names", _loc(arg)
                           if isinstance(arg, Tree) else arg)
            names.append(Name(self._name(arg.children[0], "node", qualified=True),
                              _loc(arg.children[0])))
        return Call(func, tuple(names), _loc(func_tok))

    # ------------------------------------------------------------------ resistor codes
    def _resolve_codes(self):
        """``= R47`` is the IEC 60062 code 0.47 unless R47 names an element or nominal in
        the sheet; ``= 47R`` is 47 unless R does (then it is a missing ``*``)."""
        for owner, attr, value, name, form in self.deferred:
            if form == "rcode":
                if name.name in self.declared:
                    raise SheetError(f"missing '*' before '{name.name}' (it names a part of "
                                     f"this sheet, so this is not the resistor code)",
                                     name.loc.line, name.loc.col,
                                     hint=f"write n*{name.name} for a product")
                continue
            if name.name in self.declared:
                continue
            number = Fraction("0." + name.name[1:])
            new = Value(Quantity(number, None, name.loc), None, value.tolerance, value.loc)
            setattr(owner, attr, new)
