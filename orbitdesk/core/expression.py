"""Tokenizer and parser for one expression of the model language.

A hand-written recursive-descent parser: it accepts numbers, names (with trailing primes for
derivative states), the subscripts ``[n]``, ``[n+1]`` and ``[0]``, ``+ - * / ^ **``, parentheses
and calls of whitelisted functions. Nothing is ever evaluated as Python; the result is a small
tree of plain nodes that ``symbolic`` turns into sympy expressions.
"""

from __future__ import annotations

import keyword
import re
from dataclasses import dataclass, replace

from .diagnostics import ParseError

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

# ---------------------------------------------------------------- tokens


@dataclass(frozen=True)
class Token:
    kind: str  # num, name, op, end
    text: str
    column: int  # 1-based
    end: int  # exclusive


_NUMBER = re.compile(r"(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?", re.ASCII)
_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*'*")
_OPS = ("**", "+", "-", "*", "/", "^", "(", ")", ",", "[", "]")


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
        if two in ("==", "<=", ">=", "!=") or ch in "<>":
            op = two if two in ("==", "<=", ">=", "!=") else ch
            raise ParseError(f"comparison '{op}' is not supported; use heaviside(), min() or max()",
                             col, col + len(op))
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


def walk(node):
    """Yield every node of a tree (iteratively: deep trees do not recurse)."""
    stack = [node]
    while stack:
        item = stack.pop()
        yield item
        if isinstance(item, Binary):
            stack.extend((item.right, item.left))
        elif isinstance(item, Unary):
            stack.append(item.operand)
        elif isinstance(item, Call):
            stack.extend(reversed(item.args))


# ---------------------------------------------------------------- parser


class _Parser:
    def __init__(self, tokens: list[Token]):
        self.tokens = tokens
        self.pos = 0
        self.depth = 0

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
            hint = ""
            if tok.kind in ("name", "num") or tok.text == "(":
                hint = "; is an operator such as '*' missing?"
            raise ParseError(f"unexpected '{tok.text}'{hint}", tok.column, tok.end)
        return node

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
        if tok.kind == "name":
            self.advance()
            if self.tok.kind == "op" and self.tok.text == "(":
                return self.call(tok)
            if self.tok.kind == "op" and self.tok.text == "[":
                return self.subscript(tok)
            return Name(tok.text, tok.column, tok.end)
        if tok.kind == "op" and tok.text == "(":
            self.advance()
            inner = self.expr()
            close = self.expect(")", "')'")
            if isinstance(inner, (Binary, Unary)):  # the span of "(a + b)" includes its parentheses
                inner = replace(inner, column=tok.column, end=close.end)
            return inner
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


def parse_expression(text: str, offset: int = 1):
    """Parse one expression; raise ParseError with exact columns (counted from ``offset``)."""
    if len(text) > MAX_LINE_LENGTH:
        raise ParseError(f"line is longer than {MAX_LINE_LENGTH} characters", offset, offset + 1)
    return _Parser(tokenize(text, offset)).parse()
