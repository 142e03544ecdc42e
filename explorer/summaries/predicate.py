"""Row predicates the user writes, checked before they reach a database engine.

A predicate is a condition on the columns of the table, such as
``temperature > 80 AND line IN ('L3', 'L4')`` or ``day = DATE '2026-03-14'``. It is
parsed by a small grammar (a WHERE-clause expression, nothing else), every name must
be a column of the table or an allowed function, and the predicate is rendered back to
text in the engine's own quoting. Statement separators, comments, sub-queries and
unknown names are refused with a message that says what to write instead, so a
predicate cannot carry any other SQL.

Grammar (keywords in any case)::

    expr      := and ("OR" and)*
    and       := not ("AND" not)*
    not       := "NOT" not | test
    test      := sum [cmp sum | ["NOT"] "IN" "(" value ("," value)* ")"
                      | ["NOT"] "BETWEEN" sum "AND" sum | "IS" ["NOT"] "NULL"
                      | ["NOT"] "LIKE" string]
    sum       := product (("+" | "-") product)*
    product   := unary (("*" | "/" | "%") unary)*
    unary     := "-" unary | primary
    primary   := number | string | TRUE | FALSE | NULL | DATE string | TIMESTAMP string
               | column | function "(" [sum ("," sum)*] ")" | "(" expr ")"

Columns are bare names (letters, digits, underscore) or double-quoted names.
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from dataclasses import dataclass

from ..core.errors import EditError, closest_names, preview

__all__ = ["Predicate", "parse_predicate"]

FUNCTIONS = ("abs", "round", "lower", "upper", "trim", "length", "coalesce", "year", "month", "day", "hour")
_KEYWORDS = {"and", "or", "not", "in", "between", "is", "null", "true", "false", "like", "date", "timestamp"}
_TOKEN = re.compile(
    r"""\s*(?:
        (?P<number>\d+(?:\.\d*)?(?:[eE][-+]?\d+)?|\.\d+(?:[eE][-+]?\d+)?)
      | (?P<string>'[^']*')
      | (?P<quoted>"[^"]+")
      | (?P<name>[A-Za-z_][A-Za-z0-9_]*)
      | (?P<op><>|!=|<=|>=|=|<|>|\+|-|\*|/|%|\(|\)|,)
    )""",
    re.VERBOSE,
)
_CMP = {"=", "<>", "!=", "<", "<=", ">", ">="}


@dataclass(frozen=True)
class _Tok:
    kind: str  # number, string, column, func, kw, op
    text: str


@dataclass(frozen=True)
class Predicate:
    """A checked predicate: the user's text and its tokens (columns marked as such).

    ``render('duckdb')`` and ``render('spark')`` give the same expression with column
    names quoted for that engine.
    """

    text: str
    tokens: tuple[_Tok, ...]
    columns: tuple[str, ...]

    def render(self, dialect: str = "duckdb") -> str:
        out: list[str] = []
        for i, t in enumerate(self.tokens):
            if t.text == "(" and i and self.tokens[i - 1].kind == "func":
                out[-1] += "("
                continue
            if t.kind == "column":
                out.append(f'"{t.text}"' if dialect == "duckdb" else f"`{t.text}`")
            elif t.kind in ("kw", "func"):
                out.append(t.text.upper() if t.kind == "kw" else t.text.lower())
            else:
                out.append(t.text)
        text = " ".join(out)
        return text.replace("( ", "(").replace(" )", ")").replace(" ,", ",")

    def __str__(self) -> str:
        return self.render("duckdb")


def _refuse(text: str, why: str) -> EditError:
    return EditError(
        f"predicate {text!r} refused: {why}. Write a condition on columns, e.g. "
        "\"temperature > 80 AND line IN ('L3', 'L4')\""
    )


def _tokenize(text: str, columns: Iterable[str]) -> list[_Tok]:
    for bad, what in ((";", "';' (one condition only, no statements)"), ("--", "comments ('--')"),
                      ("/*", "comments ('/*')"), ("\\", "backslashes"), ("`", "backquotes")):
        if bad in text:
            raise _refuse(text, f"it contains {what}")
    cols = [str(c) for c in columns]
    lower_cols = {c.lower(): c for c in cols}
    out: list[_Tok] = []
    pos = 0
    stripped = text.rstrip()
    while pos < len(stripped):
        m = _TOKEN.match(stripped, pos)
        if not m or m.end() == pos:
            raise _refuse(text, f"cannot read it from {stripped[pos:pos + 12].strip()!r} on")
        pos = m.end()
        kind = m.lastgroup or ""
        val = m.group(kind)
        if kind == "quoted":
            name = val[1:-1]
            if name not in cols:
                near = closest_names(name, cols)
                hint = f" (did you mean {preview(near)}?)" if near else ""
                raise _refuse(text, f"{name!r} is not a column of the table{hint}")
            out.append(_Tok("column", name))
        elif kind == "name":
            low = val.lower()
            if val in cols or (low in lower_cols and low not in _KEYWORDS):
                out.append(_Tok("column", val if val in cols else lower_cols[low]))
            elif low in _KEYWORDS:
                out.append(_Tok("kw", low))
            elif low in FUNCTIONS:
                out.append(_Tok("func", low))
            else:
                near = closest_names(val, cols)
                hint = f" (did you mean {preview(near)}?)" if near else ""
                raise _refuse(
                    text, f"{val!r} is not a column of the table nor an allowed function{hint}; "
                    f"columns: {preview(cols, 12)}; functions: {', '.join(FUNCTIONS)}"
                )
        else:
            out.append(_Tok(kind, val))
    if not out:
        raise _refuse(text, "it is empty")
    return out


class _Parser:
    """Recursive-descent check of the grammar in the module docstring."""

    def __init__(self, text: str, toks: list[_Tok]) -> None:
        self.text, self.toks, self.i = text, toks, 0

    def peek(self, kind: str | None = None, text: str | None = None) -> bool:
        if self.i >= len(self.toks):
            return False
        t = self.toks[self.i]
        return (kind is None or t.kind == kind) and (text is None or t.text == text)

    def take(self, kind: str | None = None, text: str | None = None, what: str = "") -> _Tok:
        if not self.peek(kind, text):
            got = self.toks[self.i].text if self.i < len(self.toks) else "the end"
            raise _refuse(self.text, f"expected {what or text or kind} but found {got!r}")
        self.i += 1
        return self.toks[self.i - 1]

    def parse(self) -> None:
        self.expr()
        if self.i < len(self.toks):
            raise _refuse(self.text, f"unexpected {self.toks[self.i].text!r}")

    def expr(self) -> None:
        self.conj()
        while self.peek("kw", "or"):
            self.i += 1
            self.conj()

    def conj(self) -> None:
        self.neg()
        while self.peek("kw", "and"):
            self.i += 1
            self.neg()

    def neg(self) -> None:
        if self.peek("kw", "not"):
            self.i += 1
            self.neg()
        else:
            self.test()

    def test(self) -> None:
        self.sum()
        if self.peek("op") and self.toks[self.i].text in _CMP:
            self.i += 1
            self.sum()
            return
        if self.peek("kw", "is"):
            self.i += 1
            if self.peek("kw", "not"):
                self.i += 1
            self.take("kw", "null", "NULL after IS")
            return
        if self.peek("kw", "not"):
            self.i += 1
            if not (self.peek("kw", "in") or self.peek("kw", "between") or self.peek("kw", "like")):
                raise _refuse(self.text, "NOT here must be followed by IN, BETWEEN or LIKE")
        if self.peek("kw", "in"):
            self.i += 1
            self.take("op", "(", "'(' after IN")
            self.sum()
            while self.peek("op", ","):
                self.i += 1
                self.sum()
            self.take("op", ")", "')' closing the IN list")
        elif self.peek("kw", "between"):
            self.i += 1
            self.sum()
            self.take("kw", "and", "AND in BETWEEN ... AND ...")
            self.sum()
        elif self.peek("kw", "like"):
            self.i += 1
            self.take("string", what="a quoted pattern after LIKE")

    def sum(self) -> None:
        self.product()
        while self.peek("op", "+") or self.peek("op", "-"):
            self.i += 1
            self.product()

    def product(self) -> None:
        self.unary()
        while self.peek("op", "*") or self.peek("op", "/") or self.peek("op", "%"):
            self.i += 1
            self.unary()

    def unary(self) -> None:
        if self.peek("op", "-"):
            self.i += 1
            self.unary()
        else:
            self.primary()

    def primary(self) -> None:
        if self.peek("number") or self.peek("string") or self.peek("column") or self.peek("kw", "true") or self.peek("kw", "false") or self.peek("kw", "null"):
            self.i += 1
        elif self.peek("kw", "date") or self.peek("kw", "timestamp"):
            self.i += 1
            self.take("string", what="a quoted date after DATE/TIMESTAMP")
        elif self.peek("func"):
            self.i += 1
            self.take("op", "(", "'(' after a function name")
            if not self.peek("op", ")"):
                self.sum()
                while self.peek("op", ","):
                    self.i += 1
                    self.sum()
            self.take("op", ")", "')' closing the function call")
        elif self.peek("op", "("):
            self.i += 1
            self.expr()
            self.take("op", ")", "a closing ')'")
        else:
            got = self.toks[self.i].text if self.i < len(self.toks) else "the end"
            raise _refuse(self.text, f"expected a column, value or '(' but found {got!r}")


def parse_predicate(text: str, columns: Iterable[str]) -> Predicate:
    """Check ``text`` against the grammar and the table's ``columns``; raise :class:`EditError` if refused."""
    if not isinstance(text, str):
        raise EditError(f"a predicate is text such as \"temperature > 80\", not {type(text).__name__}")
    toks = _tokenize(text, columns)
    _Parser(text, toks).parse()
    used = tuple(dict.fromkeys(t.text for t in toks if t.kind == "column"))
    if not used:
        raise _refuse(text, "it names no column, so it would keep or drop every row alike")
    return Predicate(text=text.strip(), tokens=tuple(toks), columns=used)
