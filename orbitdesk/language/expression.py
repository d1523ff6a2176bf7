"""Tokenizer and parser for one expression of the model language.

A hand-written recursive-descent parser: it accepts numbers, names (with trailing primes for
derivative states), the subscripts ``[n]``, ``[n+1]`` and ``[0]``, family members ``x_{i+1}``,
``+ - * / ^ **``, parentheses, calls of whitelisted (or model-defined) functions, conditions
``if(COND, A, B)`` with ``< <= > >= and or not``, and sums ``sum(EXPR, j in A..B)``. Nothing is ever
evaluated as Python; the result is a small tree of plain nodes that ``symbolic`` turns into sympy
expressions.
"""

from __future__ import annotations

import keyword
import re
from dataclasses import dataclass, replace

from orbitdesk.language.diagnostics import ParseError

MAX_DEPTH = 120
MAX_LINE_LENGTH = 20_000
MAX_NUMBER_DIGITS = 40

FUNCTIONS = {
    "sin": 1, "cos": 1, "tan": 1, "asin": 1, "acos": 1, "atan": 1, "atan2": 2,
    "sinh": 1, "cosh": 1, "tanh": 1, "exp": 1, "log": 1, "log10": 1, "sqrt": 1,
    "abs": 1, "sign": 1, "min": 2, "max": 2, "heaviside": 1, "mod": 2, "floor": 1,
}
NONSMOOTH_FUNCTIONS = frozenset({"abs", "sign", "min", "max", "heaviside", "mod", "floor"})
CONSTANTS = ("pi", "e")
KEYWORDS = frozenset(keyword.kwlist)  # Python's words (lambda, import, ...) are never names here
WORDS = frozenset({"if", "and", "or", "not", "in"})  # the language's own words (conditions, sums)
COMPARISONS = ("<=", ">=", "<", ">")

# ---------------------------------------------------------------- tokens

# An event line, ``when COND then ...`` (read by language/events.py); here so that the editor's colouring
# can recognise it without loading sympy. 'when = 3' stays a parameter named 'when'.
EVENT_LINE = re.compile(r"^(\s*)when\s+(?!=)")


def is_event_line(code: str) -> bool:
    return EVENT_LINE.match(code) is not None


@dataclass(frozen=True)
class Token:
    kind: str  # num, name, word, op, end
    text: str
    column: int  # 1-based
    end: int  # exclusive


_NUMBER = re.compile(r"(\d+(?:\.(?!\.)\d*)?|\.\d+)([eE][+-]?\d+)?", re.ASCII)
_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*(?:(?<=_)\{[^{}\n]*\})?'*")


def tokenize(text: str, offset: int = 1) -> list[Token]:
    """Split ``text`` into tokens; columns count from ``offset`` (1-based)."""
    tokens: list[Token] = []
    i = 0
    n = len(text)
    while i < n:
        ch = text[i]
        col = offset + i
        if ch in " \t":
            i += 1
            continue
        m = _NUMBER.match(text, i)
        if m and ch in "0123456789.":
            digits = m.group(1).replace(".", "")
            if len(digits.lstrip("0")) > MAX_NUMBER_DIGITS:
                raise ParseError(f"number has more than {MAX_NUMBER_DIGITS} digits", col, offset + m.end())
            tokens.append(Token("num", m.group(0), col, offset + m.end()))
            i = m.end()
            if i < n and (text[i].isalpha() or text[i] == "_"):
                raise ParseError(f"unexpected '{text[i]}' after the number {m.group(0)}; "
                                 "write a '*' between a number and a name", offset + i, offset + i + 1)
            continue
        m = _NAME.match(text, i)
        if m:
            if m.group(0) in WORDS:
                tokens.append(Token("word", m.group(0), col, offset + m.end()))
                i = m.end()
                continue
            if m.group(0) in KEYWORDS:
                raise ParseError(f"'{m.group(0)}' is not part of the model language", col, offset + m.end())
            tokens.append(Token("name", m.group(0), col, offset + m.end()))
            i = m.end()
            if i < n and text[i] == ".":
                raise ParseError("attribute access ('.') is not part of the model language",
                                 offset + i, offset + i + 1)
            continue
        two = text[i:i + 2]
        if two == "**":
            tokens.append(Token("op", "**", col, col + 2))
            i += 2
            continue
        if ch in "+-*/^(),[]":
            tokens.append(Token("op", ch, col, col + 1))
            i += 1
            continue
        if ch in "'\"":
            raise ParseError("strings are not part of the model language", col, col + 1)
        if two in ("<=", ">=") or ch in "<>":
            op = two if two in ("<=", ">=") else ch
            tokens.append(Token("op", op, col, col + len(op)))
            i += len(op)
            continue
        if two in ("==", "!="):
            raise ParseError(f"'{two}' is not supported: exact equality of computed numbers rarely holds; "
                             "compare with <, <=, > or >=", col, col + 2)
        if two == "..":
            tokens.append(Token("op", "..", col, col + 2))
            i += 2
            continue
        if ch in "{}":
            raise ParseError("braces belong to family members such as x_{i}", col, col + 1)
        if ch == "=":
            raise ParseError("only one '=' is allowed in a statement", col, col + 1)
        if ch == "\x00":
            raise ParseError("NUL character in the text", col, col + 1)
        if ch == ".":
            raise ParseError("attribute access ('.') is not part of the model language", col, col + 1)
        shown = ch if ch.isprintable() else f"U+{ord(ch):04X}"
        raise ParseError(f"unexpected character '{shown}'", col, col + 1)
    tokens.append(Token("end", "", offset + n, offset + n + 1))
    return tokens


# ---------------------------------------------------------------- tree


@dataclass(frozen=True)
class Num:
    text: str
    column: int
    end: int


@dataclass(frozen=True)
class Name:
    name: str  # includes primes, e.g. "x'"
    column: int
    end: int
    subscript: str | None = None  # None, "n", "n+1" or "0"
    origin: str | None = None  # for a family member: how it was written, e.g. "i = 40 in line 3 reads x_{i+1}"


@dataclass(frozen=True)
class FamilyName:
    """A family member as written, ``x_{i+1}'``: expanded into a plain Name before use."""

    base: str  # "x_"
    index: object  # tree of the index expression
    index_text: str
    primes: int
    column: int
    end: int


@dataclass(frozen=True)
class Compare:
    op: str  # < <= > >=
    left: object
    right: object
    column: int
    end: int


@dataclass(frozen=True)
class Logic:
    op: str  # and, or, not
    args: tuple
    column: int
    end: int


@dataclass(frozen=True)
class If:
    cond: object
    then: object
    other: object
    column: int
    end: int


@dataclass(frozen=True)
class Sum:
    """``sum(body, var in lo..hi)``: expanded into a chain of '+' before use."""

    body: object
    var: str
    lo: object
    hi: object
    column: int
    end: int


@dataclass(frozen=True)
class Call:
    func: str
    args: tuple
    column: int
    end: int


@dataclass(frozen=True)
class Unary:
    op: str
    operand: object
    column: int
    end: int


@dataclass(frozen=True)
class Binary:
    op: str  # + - * / ^
    left: object
    right: object
    column: int
    end: int


def children(node) -> tuple:
    """The value sub-trees of a node (index expressions and sum bounds are not values)."""
    if isinstance(node, (Binary, Compare)):
        return (node.left, node.right)
    if isinstance(node, Unary):
        return (node.operand,)
    if isinstance(node, (Call, Logic)):
        return node.args
    if isinstance(node, If):
        return (node.cond, node.then, node.other)
    if isinstance(node, Sum):
        return (node.body,)
    return ()


def walk(node):
    """Yield every node of a tree (iteratively: deep trees do not recurse)."""
    stack = [node]
    while stack:
        item = stack.pop()
        yield item
        stack.extend(reversed(children(item)))


def is_condition(node) -> bool:
    return isinstance(node, (Compare, Logic))


# ---------------------------------------------------------------- parser


class _Parser:
    def __init__(self, tokens: list[Token], text: str = "", offset: int = 1):
        self.tokens = tokens
        self.pos = 0
        self.depth = 0
        self.text = text
        self.offset = offset
        self.conditions = 0  # > 0 inside the condition of if(): parentheses may hold conditions

    @property
    def tok(self) -> Token:
        return self.tokens[self.pos]

    def advance(self) -> Token:
        tok = self.tokens[self.pos]
        self.pos += 1
        return tok

    def expect(self, text: str, what: str) -> Token:
        tok = self.tok
        if tok.kind == "op" and tok.text == text:
            return self.advance()
        found = "the end of the line" if tok.kind == "end" else f"'{tok.text}'"
        raise ParseError(f"expected {what}, found {found}", tok.column, tok.end)

    def enter(self):
        self.depth += 1
        if self.depth > MAX_DEPTH:
            raise ParseError(f"expression is nested more than {MAX_DEPTH} levels deep", self.tok.column, self.tok.end)

    def parse(self):
        if self.tok.kind == "end":
            raise ParseError("expected an expression", self.tok.column, self.tok.end)
        node = self.expr()
        if self.tok.kind != "end":
            tok = self.tok
            if tok.kind == "word" and tok.text == "if":
                raise ParseError("'if' is written as a call here: if(COND, A, B)", tok.column, tok.end)
            if tok.text in COMPARISONS or tok.text in ("and", "or"):
                raise ParseError(f"'{tok.text}' belongs inside a condition: write if(COND, A, B)",
                                 tok.column, tok.end)
            hint = ""
            if tok.kind in ("name", "num") or tok.text == "(":
                hint = "; is an operator such as '*' missing?"
            raise ParseError(f"unexpected '{tok.text}'{hint}", tok.column, tok.end)
        _check_kinds(node)
        return node

    # ------------------------------------------------------------ conditions
    def condition(self):
        self.conditions += 1
        node = self.logic_or()
        self.conditions -= 1
        return node

    def logic_or(self):
        self.enter()
        node = self.logic_and()
        while self.tok.kind == "word" and self.tok.text == "or":
            self.advance()
            right = self.logic_and()
            node = Logic("or", (node, right), node.column, right.end)
        self.depth -= 1
        return node

    def logic_and(self):
        node = self.logic_not()
        while self.tok.kind == "word" and self.tok.text == "and":
            self.advance()
            right = self.logic_not()
            node = Logic("and", (node, right), node.column, right.end)
        return node

    def logic_not(self):
        if self.tok.kind == "word" and self.tok.text == "not":
            tok = self.advance()
            self.enter()
            operand = self.logic_not()
            self.depth -= 1
            return Logic("not", (operand,), tok.column, operand.end)
        left = self.expr()
        if self.tok.kind == "op" and self.tok.text in COMPARISONS:
            op = self.advance().text
            right = self.expr()
            if self.tok.kind == "op" and self.tok.text in COMPARISONS:
                raise ParseError("comparisons cannot be chained; join them with 'and'", self.tok.column, self.tok.end)
            return Compare(op, left, right, left.column, right.end)
        return left  # a number where a condition is expected is reported by _check_kinds

    def expr(self):
        self.enter()
        node = self.term()
        while self.tok.kind == "op" and self.tok.text in "+-":
            op = self.advance().text
            right = self.term()
            node = Binary(op, node, right, node.column, right.end)
        self.depth -= 1
        return node

    def term(self):
        node = self.unary()
        while self.tok.kind == "op" and self.tok.text in ("*", "/"):
            op = self.advance().text
            right = self.unary()
            node = Binary(op, node, right, node.column, right.end)
        return node

    def unary(self):
        if self.tok.kind == "op" and self.tok.text in "+-":
            tok = self.advance()
            self.enter()
            operand = self.unary()
            self.depth -= 1
            return operand if tok.text == "+" else Unary("-", operand, tok.column, operand.end)
        return self.power()

    def power(self):
        base = self.atom()
        if self.tok.kind == "op" and self.tok.text in ("^", "**"):
            self.advance()
            self.enter()
            exponent = self.unary()  # right-associative; allows 2^-1
            self.depth -= 1
            return Binary("^", base, exponent, base.column, exponent.end)
        return base

    def atom(self):
        tok = self.tok
        if tok.kind == "num":
            self.advance()
            return Num(tok.text, tok.column, tok.end)
        if tok.kind == "word" and tok.text == "if":
            self.advance()
            return self.if_call(tok)
        if tok.kind == "name":
            self.advance()
            if "{" in tok.text:
                if self.tokens[self.pos].kind == "op" and self.tokens[self.pos].text == "(":
                    raise ParseError(f"delayed values of family members such as {tok.text}(t - tau) are not "
                                     "supported yet; write the members out", tok.column, self.tokens[self.pos].end)
                return self.family_name(tok)
            if self.tok.kind == "op" and self.tok.text == "(":
                return self.sum_call(tok) if tok.text == "sum" else self.call(tok)
            if self.tok.kind == "op" and self.tok.text == "[":
                return self.subscript(tok)
            return Name(tok.text, tok.column, tok.end)
        if tok.kind == "op" and tok.text == "(":
            self.advance()
            inner = self.logic_or() if self.conditions else self.expr()
            if self.tok.kind == "op" and self.tok.text in COMPARISONS:
                raise ParseError(f"'{self.tok.text}' belongs inside a condition: write if(COND, A, B)",
                                 self.tok.column, self.tok.end)
            close = self.expect(")", "')'")
            if isinstance(inner, (Binary, Unary, Compare, Logic)):  # "(a + b)" spans its parentheses
                inner = replace(inner, column=tok.column, end=close.end)
            return inner
        if tok.kind == "word":
            where = "inside if(COND, A, B)" if tok.text in ("and", "or", "not") else "inside sum(EXPR, j in A..B)"
            raise ParseError(f"'{tok.text}' belongs {where}", tok.column, tok.end)
        if tok.kind == "end":
            raise ParseError("expression ends too early", tok.column, tok.end)
        raise ParseError(f"unexpected '{tok.text}'", tok.column, tok.end)

    def call(self, name_tok: Token):
        self.advance()  # (
        args = []
        if not (self.tok.kind == "op" and self.tok.text == ")"):
            args.append(self.expr())
            while self.tok.kind == "op" and self.tok.text == ",":
                self.advance()
                args.append(self.expr())
        close = self.expect(")", "',' or ')'")
        return Call(name_tok.text, tuple(args), name_tok.column, close.end)

    def if_call(self, if_tok: Token):
        self.expect("(", "'(' after if")
        saved, self.conditions = self.conditions, 0
        cond = self.condition()
        self.expect(",", "',' after the condition of if(COND, A, B)")
        then = self.value_of_if()
        self.expect(",", "',' between the two values of if(COND, A, B)")
        other = self.value_of_if()
        close = self.expect(")", "')' closing if(COND, A, B)")
        self.conditions = saved
        return If(cond, then, other, if_tok.column, close.end)

    def value_of_if(self):
        node = self.expr()
        if self.tok.kind == "op" and self.tok.text in COMPARISONS:
            raise ParseError("the two values of if(COND, A, B) are numbers, not conditions",
                             self.tok.column, self.tok.end)
        return node

    def sum_call(self, name_tok: Token):
        self.advance()  # (
        body = self.expr()
        self.expect(",", "',' then the index range, as in sum(x_{j}, j in 1..N)")
        var = self.tok
        if var.kind != "name" or "{" in var.text or "'" in var.text:
            raise ParseError("expected the index name, as in sum(x_{j}, j in 1..N)", var.column, var.end)
        self.advance()
        if not (self.tok.kind == "word" and self.tok.text == "in"):
            raise ParseError("expected 'in', as in sum(x_{j}, j in 1..N)", self.tok.column, self.tok.end)
        self.advance()
        lo = self.expr()
        self.expect("..", "'..' between the first and last index")
        hi = self.expr()
        close = self.expect(")", "')' closing sum(...)")
        return Sum(body, var.text, lo, hi, name_tok.column, close.end)

    def family_name(self, tok: Token):
        text = tok.text
        open_at = text.index("{")
        close_at = text.index("}")
        inner = text[open_at + 1:close_at]
        if not inner.strip():
            raise ParseError("a family member needs an index, as in x_{i}", tok.column, tok.end)
        index = parse_expression(inner, tok.column + open_at + 1)
        return FamilyName(text[:open_at], index, inner.strip(), len(text) - close_at - 1, tok.column, tok.end)

    def subscript(self, name_tok: Token):
        open_tok = self.advance()  # [
        parts = []
        while not (self.tok.kind == "op" and self.tok.text == "]"):
            if self.tok.kind == "end":
                raise ParseError("missing ']'", open_tok.column, self.tok.column)
            parts.append(self.advance().text)
        close = self.advance()
        index = "".join(parts)
        if index not in ("n", "n+1", "0"):
            raise ParseError(f"subscript [{index}] is not allowed; only [n], [n+1] and [0]",
                             open_tok.column, close.end)
        return Name(name_tok.text, name_tok.column, close.end, subscript=index)


def _check_kinds(tree, condition: bool = False) -> None:
    """Conditions only where a condition belongs (the first argument of if), numbers everywhere else."""
    stack = [(tree, condition)]
    while stack:
        node, want_condition = stack.pop()
        if is_condition(node) != want_condition:
            if want_condition:
                raise ParseError("expected a condition such as x < 1", node.column, node.end)
            raise ParseError("a condition is not a number; to use it as one write if(COND, 1, 0)",
                             node.column, node.end)
        if isinstance(node, Logic):
            stack.extend((a, True) for a in node.args)
        elif isinstance(node, If):
            stack.extend(((node.cond, True), (node.then, False), (node.other, False)))
        else:
            stack.extend((c, False) for c in children(node))


def split_top_level_commas(text: str) -> list[tuple[str, int]]:
    """The parts of ``text`` between commas outside parentheses, each with its 0-based offset."""
    parts, depth, start = [], 0, 0
    for i, ch in enumerate(text):
        if ch in "([":
            depth += 1
        elif ch in ")]":
            depth -= 1
        elif ch == "," and depth == 0:
            parts.append((text[start:i], start))
            start = i + 1
    parts.append((text[start:], start))
    return parts


def parse_condition(text: str, offset: int = 1):
    """Parse one condition (comparisons joined by and, or, not); raise ParseError with exact columns."""
    if len(text) > MAX_LINE_LENGTH:
        raise ParseError(f"line is longer than {MAX_LINE_LENGTH} characters", offset, offset + 1)
    parser = _Parser(tokenize(text, offset), text, offset)
    if parser.tok.kind == "end":
        raise ParseError("expected a condition such as x < 0", parser.tok.column, parser.tok.end)
    node = parser.condition()
    if parser.tok.kind != "end":
        tok = parser.tok
        raise ParseError(f"unexpected '{tok.text}' after the condition", tok.column, tok.end)
    _check_kinds(node, True)
    return node


def parse_expression(text: str, offset: int = 1):
    """Parse one expression; raise ParseError with exact columns (counted from ``offset``)."""
    if len(text) > MAX_LINE_LENGTH:
        raise ParseError(f"line is longer than {MAX_LINE_LENGTH} characters", offset, offset + 1)
    return _Parser(tokenize(text, offset), text, offset).parse()
