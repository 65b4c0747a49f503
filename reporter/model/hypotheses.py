"""The hypothesis language: statements about means compiled into contrast matrices.

Grammar (a recursive-descent parser over a real token stream)::

    statement  := expr (RELATION expr)*           RELATION is one of  >  <  =
    expr       := term (("+" | "-") term)*
    term       := unary (("*" | "/") unary)*
    unary      := ("+" | "-") unary | atom
    atom       := NUMBER | NAME | `QUOTED NAME` | "mean" "(" pair ("," pair)* ")" | "(" expr ")"
    pair       := factor "=" level

A bare level name is that level's (unweighted marginal) mean; ``mean(f=a, g=b)`` is a marginal
mean over the named factors (all factors named: one cell). Numbers are coefficients and constants
only; a product or quotient of two means is not linear and is refused.

Meaning of the relations:

* ``a > b`` / ``a < b``: the statement is the directional alternative H1; the null is the
  complement (``a ≤ b`` / ``a ≥ b``); one-sided t test.
* ``a = b``: the null; two-sided t test.
* ``e0 = e1 = ... = em`` (m ≥ 2): the m adjacent equalities e_i − e_{i+1} = 0 stacked and tested
  jointly by F after reduction to full rank; ``= 0`` at the end adds the zero.

``effect = "A"`` / ``effect = "A x B"`` builds the usual Type III contrasts of unweighted marginal
means: the Kronecker product of the successive-difference matrices of the named factors with the
averaging rows of the others (Searle 1987, *Linear Models for Unbalanced Data*, section 4.9;
Kutner et al. 2005, section 23.5).

A hypothesis C·mu = h on the cell means is the hypothesis L·beta = h with L = C·D on the
coefficients of any full-rank parameterization D.
"""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass, replace
from fractions import Fraction
from typing import Sequence

import numpy as np

from reporter.errors import HypothesisError
from reporter.intake import defaults as D
from reporter.intake.files import describe_path
from reporter.intake.numtext import why_not_plain
from reporter.intake.plan import level_key
from reporter.model.design import Design, in_row_space

# ---------------------------------------------------------------------------------------------
# Tokens


@dataclass(frozen=True)
class Token:
    kind: str  # NUMBER NAME QUOTED OP REL LPAREN RPAREN COMMA END
    text: str
    pos: int


_NUMBER = re.compile(r"(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?", re.ASCII)
_NUMBER_MAX = Fraction(10) ** D.STATEMENT_NUMBER_EXPONENT
_NUMBER_MIN = 1 / _NUMBER_MAX
_NAME = re.compile(r"[^\W\d]\w*(?:[.]\w+)*", re.UNICODE)
_PLAIN_NAME = re.compile(r"^[^\W\d]\w*(?:[.]\w+)*$", re.UNICODE)
_SD_SUFFIX = re.compile(r"sd(?![\w.])", re.UNICODE)

#: The word after a number that puts it in residual standard deviations (``0.3 sd``).
SD_UNIT = "sd"


def _caret(source: str, pos: int, width: int = 1) -> str:
    return f"\n    {source}\n    {' ' * pos}{'^' * max(1, width)}"


def _error(source: str, pos: int, width: int, message: str, context: str = "") -> HypothesisError:
    prefix = f"{context}: " if context else ""
    return HypothesisError(f"{prefix}{message}{_caret(source, pos, width)}")


def tokenize(source: str, context: str = "") -> list[Token]:
    """Split a statement into tokens; an unknown character is an error with a caret."""
    if len(source) > D.MAX_STATEMENT_CHARS:
        raise HypothesisError(
            f"{context + ': ' if context else ''}the statement is {len(source)} characters long; the limit is "
            f"{D.MAX_STATEMENT_CHARS}. Split it into several [[hypotheses]], or test a whole factor with effect = \"...\"."
        )
    tokens: list[Token] = []
    i = 0
    while i < len(source):
        if len(tokens) >= D.MAX_STATEMENT_TOKENS:
            raise _error(
                source, i, 1,
                f"the statement has more than {D.MAX_STATEMENT_TOKENS} parts (names, numbers, operators); "
                "split it into several [[hypotheses]].",
                context,
            )
        ch = source[i]
        if ch.isspace():
            i += 1
            continue
        if ch == "`":
            end = source.find("`", i + 1)
            if end < 0:
                raise _error(source, i, 1, "a name opened with ` is never closed; add the closing `.", context)
            name = source[i + 1 : end].strip()
            if not name:
                raise _error(source, i, end - i + 1, "empty quoted name.", context)
            tokens.append(Token("QUOTED", name, i))
            i = end + 1
            continue
        m = _NUMBER.match(source, i)
        if m:
            after = m.end()
            unit = _SD_SUFFIX.match(source, after)
            if unit:  # "0.3sd": the number, then the unit word
                _check_number(source, i, m.group(), context)
                tokens.append(Token("NUMBER", m.group(), i))
                tokens.append(Token("NAME", "sd", after))
                i = unit.end()
                continue
            if after < len(source) and (source[after].isalpha() or source[after] == "_"):
                j = after
                while j < len(source) and (source[j].isalnum() or source[j] in "_.-"):
                    j += 1
                raise _error(
                    source, i, j - i,
                    f"'{source[i:j]}' starts with a digit; write a level name like this in backticks: `{source[i:j]}`.",
                    context,
                )
            _check_number(source, i, m.group(), context)
            tokens.append(Token("NUMBER", m.group(), i))
            i = after
            continue
        if ch.isdigit():  # a digit outside ASCII 0-9, e.g. full-width
            j = i
            while j < len(source) and (source[j].isdigit() or source[j] == "."):
                j += 1
            raise _error(
                source, i, j - i,
                f"'{source[i:j]}' {why_not_plain(source[i:j])}; a level name like this goes in backticks.",
                context,
            )
        m = _NAME.match(source, i)
        if m:
            tokens.append(Token("NAME", m.group(), i))
            i = m.end()
            continue
        two = source[i : i + 2]
        if two in (">=", "<=", "==", "!=", "=>", "=<") or ch in "≥≤≠":
            width = 2 if two in (">=", "<=", "==", "!=", "=>", "=<") else 1
            raise _error(
                source, i, width,
                f"'{source[i:i + width]}' is not a relation here. Use > or < for a directional "
                "alternative (the null ≤ or ≥ is printed for you) or = for a null of equality.",
                context,
            )
        if ch in "<>=":
            tokens.append(Token("REL", ch, i))
        elif ch in "+-*/":
            tokens.append(Token("OP", ch, i))
        elif ch == "\u2212":
            tokens.append(Token("OP", "-", i))
        elif ch == "(":
            tokens.append(Token("LPAREN", ch, i))
        elif ch == ")":
            tokens.append(Token("RPAREN", ch, i))
        elif ch == ",":
            tokens.append(Token("COMMA", ch, i))
        else:
            raise _error(source, i, 1, f"unexpected character '{ch}'. Names with spaces or symbols go in backticks.", context)
        i += 1
    tokens.append(Token("END", "", len(source)))
    return tokens


def _check_number(source: str, pos: int, text: str, context: str) -> None:
    """A number in a statement must be 0 or lie within 1e-100..1e100 in magnitude, checked before
    any exact arithmetic (``1e999999999`` would otherwise build a billion-digit integer)."""
    limit = D.STATEMENT_NUMBER_EXPONENT
    mantissa, _, exponent = text.lower().partition("e")
    digits = mantissa.replace(".", "").lstrip("0")
    if exponent and (len(exponent.lstrip("+-").lstrip("0")) > 4 or len(digits) > 40):
        ok = False
    elif len(digits) > 40:
        ok = False
    else:
        value = Fraction(text)
        ok = value == 0 or _NUMBER_MIN <= value <= _NUMBER_MAX
    if not ok:
        raise _error(
            source, pos, len(text),
            f"the number {_short(text)} is out of range: a coefficient or constant must be 0 or lie between "
            f"1e-{limit} and 1e{limit} in magnitude (and have at most 40 digits).",
            context,
        )


def _short(text: str) -> str:
    return text if len(text) <= 30 else f"{text[:20]}… ({len(text)} characters)"


# ---------------------------------------------------------------------------------------------
# Syntax tree


@dataclass(frozen=True)
class Num:
    """A number; ``unit`` is "sd" for a constant in residual standard deviations (``0.3 sd``)."""

    value: Fraction
    pos: int = 0
    width: int = 1
    unit: str | None = None


@dataclass(frozen=True)
class Mean:
    """A mean: a bare level name (``pairs`` has one entry with factor None) or mean(f=a, ...)."""

    pairs: tuple[tuple[str | None, str], ...]
    pos: int = 0
    width: int = 1


@dataclass(frozen=True)
class Neg:
    operand: "Expr"
    pos: int = 0
    width: int = 1


@dataclass(frozen=True)
class BinOp:
    op: str
    left: "Expr"
    right: "Expr"
    pos: int = 0
    width: int = 1


Expr = Num | Mean | Neg | BinOp


@dataclass(frozen=True)
class Statement:
    sides: tuple[Expr, ...]
    relations: tuple[str, ...]
    source: str


def _span(node: Expr) -> tuple[int, int]:
    """Start and end offsets of an expression in the statement text."""
    start_node = node
    while isinstance(start_node, BinOp):
        start_node = start_node.left
    end_node = node
    while isinstance(end_node, (Neg, BinOp)):
        end_node = end_node.operand if isinstance(end_node, Neg) else end_node.right
    return start_node.pos, end_node.pos + end_node.width


class _Parser:
    def __init__(self, source: str, context: str):
        self.source = source
        self.context = context
        self.tokens = tokenize(source, context)
        self.i = 0
        self.depth = 0

    def enter(self, tok: Token) -> None:
        """Count a nested parenthesis or sign; refuse a nesting deeper than the limit."""
        self.depth += 1
        if self.depth > D.MAX_STATEMENT_NESTING:
            raise self.fail(
                tok,
                f"parentheses and signs are nested more than {D.MAX_STATEMENT_NESTING} deep; simplify the statement.",
            )

    @property
    def tok(self) -> Token:
        return self.tokens[self.i]

    def fail(self, tok: Token, message: str) -> HypothesisError:
        return _error(self.source, tok.pos, max(1, len(tok.text) + (2 if tok.kind == "QUOTED" else 0)), message, self.context)

    def take(self, kind: str, what: str) -> Token:
        t = self.tok
        if t.kind != kind:
            found = "the end of the statement" if t.kind == "END" else f"'{t.text}'"
            raise self.fail(t, f"expected {what} but found {found}.")
        self.i += 1
        return t

    def statement(self) -> Statement:
        if self.tok.kind == "END":
            raise self.fail(self.tok, "the statement is empty; write for example a > b.")
        sides = [self.expr()]
        rels = []
        while self.tok.kind == "REL":
            rels.append(self.tok.text)
            self.i += 1
            sides.append(self.expr())
        if self.tok.kind == "NAME" and self.tok.text == SD_UNIT:
            raise self.fail(
                self.tok,
                "'sd' follows a number only: 0.3 sd is a constant in residual standard deviations. It cannot "
                "follow a mean or a parenthesis; write the constant on its own, as in a - b > 0.3 sd.",
            )
        if self.tok.kind != "END":
            raise self.fail(self.tok, f"unexpected '{self.tok.text}'; expected an operator (+ - * /), a relation (> < =) or the end.")
        return Statement(tuple(sides), tuple(rels), self.source)

    def expr(self) -> Expr:
        node = self.term()
        while self.tok.kind == "OP" and self.tok.text in "+-":
            t = self.tok
            self.i += 1
            node = BinOp(t.text, node, self.term(), t.pos, 1)
        return node

    def term(self) -> Expr:
        node = self.unary()
        while self.tok.kind == "OP" and self.tok.text in "*/":
            t = self.tok
            self.i += 1
            node = BinOp(t.text, node, self.unary(), t.pos, 1)
        return node

    def unary(self) -> Expr:
        t = self.tok
        if t.kind == "OP" and t.text in "+-":
            self.i += 1
            self.enter(t)
            operand = self.unary()
            self.depth -= 1
            return operand if t.text == "+" else Neg(operand, t.pos, 1)
        return self.atom()

    def atom(self) -> Expr:
        t = self.tok
        if t.kind == "NUMBER":
            self.i += 1
            nxt = self.tok
            if nxt.kind == "NAME" and nxt.text == SD_UNIT:
                self.i += 1
                return Num(Fraction(t.text), t.pos, nxt.pos + len(nxt.text) - t.pos, SD_UNIT)
            return Num(Fraction(t.text), t.pos, len(t.text))
        if t.kind == "LPAREN":
            self.i += 1
            self.enter(t)
            node = self.expr()
            self.take("RPAREN", "')'")
            self.depth -= 1
            return node
        if t.kind == "NAME" and t.text == "mean" and self.tokens[self.i + 1].kind == "LPAREN":
            return self.mean_call()
        if t.kind in ("NAME", "QUOTED"):
            self.i += 1
            width = len(t.text) + (2 if t.kind == "QUOTED" else 0)
            return Mean(((None, t.text),), t.pos, width)
        if t.kind == "END":
            raise self.fail(t, "the statement ends too early; a mean or a number is missing.")
        raise self.fail(t, f"expected a mean, a number or '(' but found '{t.text}'.")

    def mean_call(self) -> Mean:
        start = self.tok.pos
        self.i += 2
        pairs = []
        while True:
            ft = self.tok
            if ft.kind not in ("NAME", "QUOTED"):
                raise self.fail(ft, "expected a factor name inside mean(...), as in mean(dose=high).")
            self.i += 1
            eq = self.tok
            if eq.kind != "REL" or eq.text != "=":
                raise self.fail(eq, f"expected '=' after the factor name '{ft.text}', as in mean({ft.text}=level).")
            self.i += 1
            lt = self.tok
            if lt.kind not in ("NAME", "QUOTED", "NUMBER"):
                raise self.fail(lt, "expected a level after '='.")
            self.i += 1
            pairs.append((ft.text, lt.text))
            if self.tok.kind == "COMMA":
                self.i += 1
                continue
            if self.tok.kind not in ("RPAREN", "END") and lt.kind != "QUOTED":
                nxt = self.tok
                raise self.fail(
                    nxt,
                    f"expected ')' or ',' after the level '{lt.text}' but found '{nxt.text}'. A level name "
                    f"with '-', spaces or other symbols goes in backticks, as in mean({ft.text}=`{lt.text}{nxt.text}...`).",
                )
            end = self.take("RPAREN", "')' or ','")
            return Mean(tuple(pairs), start, end.pos - start + 1)


def parse(source: str, context: str = "") -> Statement:
    """Parse a statement; errors echo it with a caret under the offending token."""
    return _Parser(source, context).statement()


# ---------------------------------------------------------------------------------------------
# Printing


def _name_text(name: str) -> str:
    return name if _PLAIN_NAME.match(name) and name != "mean" else f"`{name}`"


def _level_text(name: str) -> str:
    return name if _NUMBER.fullmatch(name) else _name_text(name)


_PREC = {"+": 1, "-": 1, "*": 2, "/": 2}


def _number_text(v: Fraction, outer: int) -> str:
    """An integer, a terminating decimal, or a parenthesized quotient."""
    if v.denominator == 1:
        return str(v.numerator)
    d = v.denominator
    for p in (2, 5):
        while d % p == 0:
            d //= p
    if d == 1:
        digits = 0
        while (v * 10**digits).denominator != 1:
            digits += 1
        return f"{float(v):.{digits}f}" if digits < 16 else f"({v.numerator}/{v.denominator})"
    return f"({v.numerator}/{v.denominator})"


def unparse(node: Expr | Statement) -> str:
    """Print a statement or expression back as text that parses to the same thing."""
    if isinstance(node, Statement):
        out = unparse(node.sides[0])
        for rel, side in zip(node.relations, node.sides[1:]):
            out += f" {rel} {unparse(side)}"
        return out
    return _unparse(node, 0)


def _unparse(node: Expr, outer: int) -> str:
    if isinstance(node, Num):
        text = _number_text(node.value, outer)
        if node.unit is None:
            return text
        if text.startswith("("):  # not a terminating decimal: p sd / q reads back as the same constant
            text = f"{node.value.numerator} {node.unit} / {node.value.denominator}"
            return f"({text})" if outer >= 2 else text
        return f"{text} {node.unit}"
    if isinstance(node, Mean):
        if len(node.pairs) == 1 and node.pairs[0][0] is None:
            return _name_text(node.pairs[0][1])
        return "mean(" + ", ".join(f"{_name_text(f)}={_level_text(lv)}" for f, lv in node.pairs) + ")"
    if isinstance(node, Neg):
        return "-" + _unparse(node.operand, 3)
    prec = _PREC[node.op]
    left = _unparse(node.left, prec)
    right = _unparse(node.right, prec + 1)
    text = f"{left} {node.op} {right}"
    return f"({text})" if prec < outer else text


# ---------------------------------------------------------------------------------------------
# Evaluation to linear forms over cell means


@dataclass(frozen=True)
class _Linear:
    """weights·mu + const + const_sd·sigma: a linear form over the cell means, with a constant in the
    outcome's units and one in residual standard deviations."""

    weights: tuple[Fraction, ...]
    const: Fraction
    const_sd: Fraction = Fraction(0)

    @property
    def is_constant(self) -> bool:
        return all(w == 0 for w in self.weights)

    @property
    def is_number(self) -> bool:
        """A plain number: no mean and no part in sd units (the only thing that may multiply)."""
        return self.is_constant and self.const_sd == 0

    def __add__(self, other: "_Linear") -> "_Linear":
        return _Linear(tuple(a + b for a, b in zip(self.weights, other.weights)), self.const + other.const,
                       self.const_sd + other.const_sd)

    def scale(self, s: Fraction) -> "_Linear":
        return _Linear(tuple(w * s for w in self.weights), self.const * s, self.const_sd * s)


class _Evaluator:
    def __init__(self, design: Design, source: str, context: str):
        self.design = design
        self.source = source
        self.context = context
        self.k = design.k

    def fail(self, node, message: str) -> HypothesisError:
        return _error(self.source, node.pos, node.width, message, self.context)

    def eval(self, node: Expr) -> _Linear:
        if isinstance(node, Num):
            if node.unit == SD_UNIT:
                return _Linear((Fraction(0),) * self.k, Fraction(0), node.value)
            return _Linear((Fraction(0),) * self.k, node.value)
        if isinstance(node, Mean):
            return _Linear(self.mean_weights(node), Fraction(0))
        if isinstance(node, Neg):
            return self.eval(node.operand).scale(Fraction(-1))
        left, right = self.eval(node.left), self.eval(node.right)
        if node.op == "+":
            return left + right
        if node.op == "-":
            return left + right.scale(Fraction(-1))
        if node.op == "*":
            if not left.is_constant and not right.is_constant:
                raise self.fail(node, "multiplies two means; numbers are coefficients only, so write e.g. 2*a, not a*b.")
            if left.is_number:
                return right.scale(left.const)
            if right.is_number:
                return left.scale(right.const)
            if left.is_constant and right.is_constant:
                raise self.fail(node, "multiplies two constants in sd units (that would be in squared SDs); a "
                                      "coefficient is a plain number, as in 2 * 0.3 sd.")
            raise self.fail(node, "multiplies a mean by a constant in sd units; 'sd' marks a constant in residual "
                                  "standard deviations, not a coefficient. Write the constant on its own, as in "
                                  "a - b > 0.3 sd.")
        if not right.is_constant:
            raise self.fail(node, "divides by a mean; only division by a number is linear, as in (a + b)/2.")
        if right.const_sd != 0:
            raise self.fail(node, "divides by a constant in sd units; divide only by a plain number, as in 0.6 sd / 2.")
        if right.const == 0:
            raise self.fail(node, "divides by zero.")
        return left.scale(1 / right.const)

    def mean_weights(self, node: Mean) -> tuple[Fraction, ...]:
        d = self.design
        names = [f.name for f in d.factors]
        fixed: dict[str, str] = {}
        for factor, level in node.pairs:
            if factor is None:
                factor, level = self.resolve_bare(node, level)
            elif factor not in names:
                hint = difflib.get_close_matches(factor, names, n=1, cutoff=0.6)
                fix = f" Did you mean '{hint[0]}'?" if hint else f" The factors are {', '.join(names)}."
                raise self.fail(node, f"'{factor}' is not a factor of this design.{fix}")
            else:
                level = self.match_level(node, factor, level)
            if factor in fixed:
                raise self.fail(node, f"names factor '{factor}' twice in one mean.")
            fixed[factor] = level
        match = [all(c.as_dict()[f] == lv for f, lv in fixed.items()) for c in d.cells]
        count = sum(match)
        return tuple(Fraction(1, count) if m else Fraction(0) for m in match)

    def match_level(self, node, factor: str, level: str) -> str:
        levels = self.design.factor(factor).levels
        key = level_key(level)
        for lv in levels:
            if level_key(lv) == key:
                return lv
        hint = difflib.get_close_matches(level, levels, n=1, cutoff=0.6)
        fix = _quoting_hint(level, levels) or (f" Did you mean '{hint[0]}'?" if hint else "")
        raise self.fail(node, f"'{level}' is not a level of '{factor}' (levels: {', '.join(levels)}).{fix}")

    def resolve_bare(self, node, name: str) -> tuple[str, str]:
        d = self.design
        key = level_key(name)
        found = [(f.name, lv) for f in d.factors for lv in f.levels if level_key(lv) == key]
        if len(found) == 1:
            return found[0]
        if len(found) > 1:
            forms = " or ".join(f"mean({_name_text(f)}={_level_text(lv)})" for f, lv in found)
            raise self.fail(node, f"'{name}' is a level of more than one factor; write {forms}.")
        if key == level_key(SD_UNIT) and not found:
            raise self.fail(
                node,
                "'sd' is not a level of any factor. A constant in residual standard deviations is a number "
                "followed by sd, as in a - b > 0.3 sd.",
            )
        if any(f.name == name for f in d.factors):
            raise self.fail(
                node,
                f"'{name}' is a factor, not a level. Name a level, write mean({name}=level), "
                f"or test the whole factor with effect = \"{name}\".",
            )
        all_levels = [lv for f in d.factors for lv in f.levels]
        hint = difflib.get_close_matches(name, all_levels, n=1, cutoff=0.6)
        fix = _quoting_hint(name, all_levels) or (
            f" Did you mean '{hint[0]}'?" if hint else f" The levels are {', '.join(all_levels[:30])}."
        )
        raise self.fail(node, f"'{name}' is not a level of any factor.{fix}")


def _quoting_hint(name: str, levels: Sequence[str]) -> str:
    """When ``name`` is a piece of a level whose name needs backticks (``low-dose`` read as
    ``low - dose``), say how to quote it."""
    pieces = [lv for lv in levels if not _PLAIN_NAME.match(lv) and name in re.split(r"[^\w.]+", lv)]
    if not pieces:
        return ""
    return (
        f" Did you mean the level `{pieces[0]}`? A name with '-', spaces or other symbols must be quoted "
        f"in backticks, or '-' reads as minus: write `{pieces[0]}`."
    )


# ---------------------------------------------------------------------------------------------
# Compiled hypotheses


@dataclass(frozen=True)
class Contrast:
    """A compiled hypothesis C·mu = h (q rows) over the cells, and L = C·D over the betas."""

    name: str
    statement: str
    kind: str  # "means" or "effect"
    test: str  # "t" or "F"
    alternative: str  # "greater", "less" or "two-sided"
    weights: tuple[tuple[Fraction, ...], ...]  # C, exact
    rhs: tuple[Fraction, ...]  # h, exact
    beta_weights: tuple[tuple[Fraction, ...], ...]  # L = C·D, exact
    notes: tuple[str, ...] = ()
    role: str = "planned"
    factors: tuple[str, ...] = ()  # for effect hypotheses: the factors of the effect
    # An equivalence claim (alternative "equivalence", ``LOW < c'mu < HIGH``): the bounds, exact, in
    # ``unit``; rhs is then 0 (C·mu itself is estimated).
    bounds: tuple[Fraction, Fraction] | None = None
    # The unit of rhs and bounds: "raw" (the outcome's units) or "sd" (residual standard deviations,
    # as written with ``0.3 sd``; converted with the fitted residual SD by :func:`in_outcome_units`).
    unit: str = "raw"
    # After :func:`in_outcome_units` converted sd units: the residual SD used and the constants as written.
    from_sd: "SdConversion | None" = None

    @property
    def is_equivalence(self) -> bool:
        return self.alternative == EQUIVALENCE

    @property
    def C(self) -> np.ndarray:
        return np.array([[float(w) for w in row] for row in self.weights])

    @property
    def h(self) -> np.ndarray:
        return np.array([float(x) for x in self.rhs])

    @property
    def L(self) -> np.ndarray:
        return np.array([[float(w) for w in row] for row in self.beta_weights])

    @property
    def q(self) -> int:
        return len(self.weights)

    def equivalence_parts(self) -> tuple[str, str, str]:
        """The expression and the LOW and HIGH sides of an equivalence claim, as written."""
        stmt = parse(self.statement)
        low, high = (stmt.sides[0], stmt.sides[2]) if stmt.relations[0] == "<" else (stmt.sides[2], stmt.sides[0])
        return unparse(stmt.sides[1]), unparse(low), unparse(high)

    def null_text(self) -> str:
        """H0 in symbols."""
        if self.is_equivalence:
            mid, low, high = self.equivalence_parts()
            return f"{mid} ≤ {low} or {mid} ≥ {high}"
        if self.kind == "effect":
            if len(self.factors) == 1:
                return f"the unweighted marginal means of {self.factors[0]} are all equal"
            return f"no {' × '.join(self.factors)} interaction: every interaction contrast of the cell means is 0"
        if self.alternative == "greater":
            return self.statement_with(">", "≤")
        if self.alternative == "less":
            return self.statement_with("<", "≥")
        return self.statement

    def alternative_text(self) -> str:
        """H1 in symbols."""
        if self.is_equivalence:
            mid, low, high = self.equivalence_parts()
            return f"{low} < {mid} < {high}"
        if self.kind == "effect":
            if len(self.factors) == 1:
                return f"at least two unweighted marginal means of {self.factors[0]} differ"
            return f"at least one {' × '.join(self.factors)} interaction contrast differs from 0"
        if self.alternative != "two-sided":
            return self.statement
        relations = sum(1 for t in tokenize(self.statement) if t.kind == "REL")
        if self.q == 1 and relations == 1:
            return self.statement_with("=", "≠")
        return "not all of the equalities in H0 hold"

    def statement_with(self, old: str, new: str) -> str:
        tokens = tokenize(self.statement)
        out, last = [], 0
        for t in tokens:
            if t.kind == "REL" and t.text == old:
                out.append(self.statement[last : t.pos] + new)
                last = t.pos + 1
        out.append(self.statement[last:])
        return "".join(out)


EQUIVALENCE = "equivalence"


@dataclass(frozen=True)
class SdConversion:
    """Constants written in residual SDs, and the fitted residual SD that put them in the outcome's
    units (the bounds are then estimated from the data; Lakens 2017, "Equivalence tests: a practical
    primer for t tests, correlations, and meta-analyses", Social Psychological and Personality
    Science 8, 355-362)."""

    residual_sd: float
    rhs: tuple[Fraction, ...]
    bounds: tuple[Fraction, Fraction] | None


def in_outcome_units(contrast: Contrast, residual_sd: float) -> Contrast:
    """The contrast with constants in sd units multiplied by the fitted residual SD (exactly, as
    fractions; rounded once when used); a contrast in the outcome's units is returned unchanged."""
    if contrast.unit != SD_UNIT:
        return contrast
    s = Fraction(residual_sd)
    return replace(
        contrast,
        rhs=tuple(h * s for h in contrast.rhs),
        bounds=None if contrast.bounds is None else (contrast.bounds[0] * s, contrast.bounds[1] * s),
        unit="raw",
        from_sd=SdConversion(float(residual_sd), contrast.rhs, contrast.bounds),
    )


def constant_text(value: Fraction, unit: str) -> str:
    """A constant as a statement writes it (``-0.3 sd``, ``2``)."""
    return unparse(Num(value, unit=None if unit != SD_UNIT else SD_UNIT)) if value >= 0 else \
        "-" + constant_text(-value, unit)


def _fr(row) -> tuple[Fraction, ...]:
    return tuple(Fraction(x) for x in row)


def _rank(rows: list[tuple[Fraction, ...]]) -> int:
    """Exact rank by fraction-free Gaussian elimination."""
    m = [list(r) for r in rows]
    rank, cols = 0, len(m[0]) if m else 0
    for c in range(cols):
        pivot = next((r for r in range(rank, len(m)) if m[r][c] != 0), None)
        if pivot is None:
            continue
        m[rank], m[pivot] = m[pivot], m[rank]
        for r in range(len(m)):
            if r != rank and m[r][c] != 0:
                f = m[r][c] / m[rank][c]
                m[r] = [a - f * b for a, b in zip(m[r], m[rank])]
        rank += 1
    return rank


def reduce_rows(
    rows: Sequence[tuple[Fraction, ...]], rhs: Sequence[Fraction], labels: Sequence[str], context: str = ""
) -> tuple[list[tuple[Fraction, ...]], list[Fraction], list[str]]:
    """Keep a maximal set of linearly independent rows (in their given order), exactly.

    A dropped row must be consistent: [C | h] has the same rank as C, otherwise the hypothesis
    contradicts itself.
    """
    kept: list[tuple[Fraction, ...]] = []
    kept_h: list[Fraction] = []
    dropped: list[str] = []
    for row, h, label in zip(rows, rhs, labels):
        if _rank(kept + [row]) > len(kept):
            kept.append(row)
            kept_h.append(h)
            continue
        aug = [r + (hh,) for r, hh in zip(kept, kept_h)]
        if _rank(aug + [row + (h,)]) > len(kept):
            raise HypothesisError(
                f"{context}: the equalities contradict each other ({label} cannot hold together "
                "with the others). Check the numbers in the statement."
            )
        dropped.append(label)
    notes = [
        f"{label} follows from the other rows and was dropped; {len(kept)} {'row' if len(kept) == 1 else 'rows'} of full rank remain{'s' if len(kept) == 1 else ''}."
        for label in dropped
    ]
    return kept, kept_h, notes


def _beta_weights(design: Design, rows) -> tuple[tuple[Fraction, ...], ...]:
    """L = C·D exactly: each row is scaled to integers by the least common multiple of its
    denominators, multiplied by the (integer) design over the cells it touches, and divided back."""
    m = design.matrix
    out = []
    for row in rows:
        nz = [c for c, w in enumerate(row) if w != 0]
        scale = math.lcm(*(row[c].denominator for c in nz)) if nz else 1
        ints = np.array([int(row[c] * scale) for c in nz], dtype=object)
        sub = m[nz].astype(object) if nz else np.zeros((0, m.shape[1]), dtype=object)
        totals = ints @ sub if nz else [0] * m.shape[1]
        out.append(tuple(Fraction(int(t), scale) for t in totals))
    return tuple(out)


def compile_statement(
    design: Design,
    source: str,
    name: str = "",
    role: str = "planned",
    context: str = "",
) -> Contrast:
    """Compile a statement about means into a :class:`Contrast`."""
    stmt = parse(source, context)
    ev = _Evaluator(design, source, context)
    sides = [ev.eval(s) for s in stmt.sides]
    rels = stmt.relations
    if not rels:
        raise _error(
            source, len(source.rstrip()), 1,
            "has no relation; write a > b (directional), a = b (equality) or a = b = c (several).",
            context,
        )
    if all(s.is_constant for s in sides):
        raise _error(source, 0, len(source), "has no mean in it; name at least one level or mean(...).", context)
    directional = [r for r in rels if r in "<>"]
    if len(rels) == 2 and len(directional) == 2 and (sides[0].is_constant or sides[2].is_constant):
        return _compile_equivalence(design, stmt, sides, name, role, context)
    if directional and len(rels) > 1:
        tok = next(t for t in tokenize(source) if t.kind == "REL" and t.text in "<>")
        if all(r in "<>" for r in rels):
            raise _error(
                source, tok.pos, 1,
                "chains more than one > or <. A directional hypothesis compares two sides; split the "
                "chain into separate [[hypotheses]] (e.g. a > b and b > c). An equivalence claim has "
                "constants at both ends: LOW < a - b < HIGH.",
                context,
            )
        raise _error(
            source, tok.pos, 1,
            "mixes > or < with =. Write the directional part and the equality as separate [[hypotheses]].",
            context,
        )
    for j in range(2, len(sides)):
        for i in range(j - 1):
            if sides[i] == sides[j]:
                start, end = _span(stmt.sides[j])
                raise _error(
                    source, start, end - start,
                    f"repeats side {i + 1} ({unparse(stmt.sides[i])}) as side {j + 1}; the chain states that "
                    "equality twice. Name each mean once, e.g. a = b = c.",
                    context,
                )
    unit = _statement_unit(stmt, sides, context)
    rows, rhs, labels = [], [], []
    for i in range(len(sides) - 1):
        diff = sides[i] + sides[i + 1].scale(Fraction(-1))
        rows.append(diff.weights)
        rhs.append(-(diff.const_sd if unit == SD_UNIT else diff.const))
        left_src, right_src = unparse(stmt.sides[i]), unparse(stmt.sides[i + 1])
        labels.append(f"'{left_src} {rels[i]} {right_src}'")
        if all(w == 0 for w in diff.weights):
            start, end = _span(stmt.sides[i + 1])
            if diff.const == 0 and diff.const_sd == 0:
                raise _error(
                    source, start, end - start,
                    f"compares a mean with itself ({left_src} {rels[i]} {right_src} holds whatever the data); "
                    "compare different means.",
                    context,
                )
            raise _error(
                source, start, end - start,
                f"the two sides of {labels[-1]} differ only by a number; no data could test it.",
                context,
            )
    if directional:
        test, alternative = "t", ("greater" if rels[0] == ">" else "less")
        notes: list[str] = []
    else:
        rows, rhs, notes = reduce_rows(rows, rhs, labels, context or source)
        test = "t" if len(rows) == 1 else "F"
        alternative = "two-sided"
    return Contrast(
        name=name,
        statement=source.strip(),
        kind="means",
        test=test,
        alternative=alternative,
        weights=tuple(rows),
        rhs=tuple(rhs),
        beta_weights=_beta_weights(design, rows),
        notes=tuple(notes),
        role=role,
        unit=unit,
    )


def _sd_nodes(node: Expr) -> list[Num]:
    """Every constant written in sd units in an expression, left to right."""
    if isinstance(node, Num):
        return [node] if node.unit == SD_UNIT else []
    if isinstance(node, Neg):
        return _sd_nodes(node.operand)
    if isinstance(node, BinOp):
        return _sd_nodes(node.left) + _sd_nodes(node.right)
    return []


_MIXED_UNITS = (
    "mixes constants in the outcome's units with constants in sd units; state every constant of the "
    "statement in one unit (all plain numbers, or all followed by sd, as in a - b > 0.3 sd)."
)


def _statement_unit(stmt: Statement, sides: Sequence[_Linear], context: str) -> str:
    """The unit of the statement's constants ("raw" or "sd"); a statement of several equalities
    (an F test) and a statement mixing the two units are refused."""
    source = stmt.source
    sd_nodes = [n for side in stmt.sides for n in _sd_nodes(side)]
    if not sd_nodes:
        return "raw"
    if len(stmt.relations) > 1:
        first = sd_nodes[0]
        raise _error(
            source, first.pos, first.width,
            "uses a constant in sd units in a chain of equalities, which is tested by F; a bound in residual "
            "SDs belongs to a statement of one relation (a - b > 0.3 sd) or to an equivalence claim "
            "(-0.3 sd < a - b < 0.3 sd).",
            context,
        )
    diff = sides[0] + sides[1].scale(Fraction(-1))
    if diff.const != 0 and diff.const_sd != 0:
        raise _error(source, 0, len(source), _MIXED_UNITS, context)
    return SD_UNIT if diff.const_sd != 0 else "raw"


def _compile_equivalence(design: Design, stmt: Statement, sides: Sequence[_Linear], name: str, role: str,
                         context: str) -> Contrast:
    """``LOW < expr < HIGH`` (or ``HIGH > expr > LOW``) with constant ends: an equivalence claim,
    tested by two one-sided tests (Schuirmann 1987, Journal of Pharmacokinetics and
    Biopharmaceutics 15, 657-680)."""
    source, rels = stmt.source, stmt.relations
    rel_tokens = [t for t in tokenize(source) if t.kind == "REL"]
    if rels[0] != rels[1]:
        raise _error(
            source, rel_tokens[1].pos, 1,
            "mixes the directions < and > in one chain. An equivalence claim reads LOW < a - b < HIGH "
            "(or HIGH > a - b > LOW); two directional claims go in separate [[hypotheses]].",
            context,
        )
    for j in (0, 2):
        if not sides[j].is_constant:
            start, end = _span(stmt.sides[j])
            raise _error(
                source, start, end - start,
                f"an equivalence claim LOW < expr < HIGH needs constants at both ends, but "
                f"'{unparse(stmt.sides[j])}' contains a mean. Write the bounds as numbers (2, -0.3 sd).",
                context,
            )
    mid = sides[1]
    low_at, high_at = (0, 2) if rels[0] == "<" else (2, 0)
    low = sides[low_at] + mid.scale(Fraction(-1))
    high = sides[high_at] + mid.scale(Fraction(-1))
    low, high = _Linear(mid.weights, low.const, low.const_sd), _Linear(mid.weights, high.const, high.const_sd)
    if any(b.const != 0 and b.const_sd != 0 for b in (low, high)) or (
        (low.const != 0 or high.const != 0) and (low.const_sd != 0 or high.const_sd != 0)
    ):
        raise _error(source, 0, len(source), _MIXED_UNITS, context)
    unit = SD_UNIT if (low.const_sd != 0 or high.const_sd != 0) else "raw"
    lo = low.const_sd if unit == SD_UNIT else low.const
    hi = high.const_sd if unit == SD_UNIT else high.const
    if lo >= hi:
        start, end = _span(stmt.sides[low_at])
        raise _error(
            source, start, end - start,
            f"the lower bound ({constant_text(lo, unit)}) is not below the upper bound "
            f"({constant_text(hi, unit)}); an equivalence claim reads LOW < expr < HIGH with LOW below HIGH.",
            context,
        )
    rows = [mid.weights]
    return Contrast(
        name=name,
        statement=source.strip(),
        kind="means",
        test="t",
        alternative=EQUIVALENCE,
        weights=tuple(rows),
        rhs=(Fraction(0),),
        beta_weights=_beta_weights(design, rows),
        role=role,
        bounds=(lo, hi),
        unit=unit,
    )


def effect_weights(design: Design, factors: Sequence[str]) -> tuple[tuple[Fraction, ...], ...]:
    """Type III contrast rows of an effect: differences of the named factors, averages of others."""
    mat = [[Fraction(1)]]
    for f in design.factors:
        n = len(f.levels)
        if f.name in factors:
            part = [[Fraction(1) if c == r else Fraction(-1) if c == r + 1 else Fraction(0) for c in range(n)] for r in range(n - 1)]
        else:
            part = [[Fraction(1, n)] * n]
        mat = [[a * b for a in ra for b in rb] for ra in mat for rb in part]
    return tuple(tuple(r) for r in mat)


def parse_effect(design: Design, text: str, context: str = "") -> tuple[str, ...]:
    """Split ``"A x B"`` into factor names, checking each exists once."""
    outside = re.sub(r"`[^`]*`", lambda m: " " * len(m.group()), text)
    for op in (":", "*"):
        if op in outside:
            raise HypothesisError(
                f"{context}: effect \"{text}\" uses '{op}'; in a plan, the factors of an interaction are "
                f"joined by x, as in \"A x B\" (or A × B)."
            )
    parts = [p.strip().strip("`") for p in re.split(r"\s+[x×]\s+", text.strip())]
    names = [f.name for f in design.factors]
    out: list[str] = []
    for p in parts:
        if p not in names:
            hint = difflib.get_close_matches(p, names, n=1, cutoff=0.6)
            fix = f" Did you mean '{hint[0]}'?" if hint else f" The factors are {', '.join(names)}."
            raise HypothesisError(f"{context}: effect \"{text}\" names '{p}', which is not a factor.{fix}")
        if p in out:
            raise HypothesisError(f"{context}: effect \"{text}\" names '{p}' twice.")
        out.append(p)
    return tuple(f for f in names if f in out)


def compile_effect(design: Design, text: str, name: str = "", role: str = "planned", context: str = "") -> Contrast:
    """The F test of a main effect or interaction on unweighted marginal means (Type III)."""
    factors = parse_effect(design, text, context)
    rows = effect_weights(design, factors)
    return Contrast(
        name=name,
        statement=" × ".join(factors),
        kind="effect",
        test="F",
        alternative="two-sided",
        weights=rows,
        rhs=tuple(Fraction(0) for _ in rows),
        beta_weights=_beta_weights(design, rows),
        role=role,
        factors=factors,
    )


def check_estimable(contrast: Contrast, design: Design, counts: Sequence[int], context: str = "") -> None:
    """Refuse a contrast that puts weight on an empty cell (it cannot be estimated)."""
    counts = list(counts)
    touched = [design.cells[c].label for c in range(design.k) if counts[c] == 0 and any(row[c] != 0 for row in contrast.weights)]
    if touched:
        shown = ", ".join(f"({t})" for t in touched[:6])
        noun = "cell" if len(touched) == 1 else "cells"
        raise HypothesisError(
            f"{context}: is not estimable: it needs the mean of the empty {noun} {shown}, which "
            f"{'has' if len(touched) == 1 else 'have'} no data. Rewrite it over cells that have data."
        )
    observed = np.asarray(counts) > 0
    rows = design.matrix[observed].astype(float)
    ok = in_row_space(rows, contrast.L)
    if not ok.all():
        raise HypothesisError(f"{context}: is not estimable from the observed cells.")


def compile_hypotheses(plan, design: Design, counts: Sequence[int] | None = None) -> tuple[Contrast, ...]:
    """Compile every ``[[hypotheses]]`` table of the plan (checking estimability if counts given)."""
    out = []
    where = ""
    if getattr(plan, "source", None) is not None:
        where = describe_path(plan.source) + ", "
    for spec in plan.hypotheses:
        at = f"{where}line {spec.line}: " if where and spec.line else where
        if spec.means is not None:
            ctx = f"{at}{spec.key_path}.means (\"{spec.name}\")"
            c = compile_statement(design, spec.means, spec.name, spec.role, ctx)
        else:
            ctx = f"{at}{spec.key_path}.effect (\"{spec.name}\")"
            c = compile_effect(design, spec.effect, spec.name, spec.role, ctx)
        if counts is not None:
            check_estimable(c, design, counts, ctx)
        out.append(c)
    return tuple(out)
