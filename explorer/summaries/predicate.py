"""Row predicates the user writes, checked before they reach a database engine.

A predicate is a condition on the columns of the table, such as
``temperature > 80 AND line IN ('L3', 'L4')`` or ``day = DATE '2026-03-14'``. It is
parsed by a small grammar (a WHERE-clause expression, nothing else), every name must
be a column of the table or an allowed function, and, when the kinds of the columns
are known (number, text, date, timestamp, true/false), every comparison, function
call and operator is type-checked: ``nozzle > 5`` on a text column, a bare text
column, ``x = NULL`` (never true) or an impossible date are refused with a
:class:`~explorer.engine.errors.PredicateError` that names the column and the types,
before any engine sees them.

The engine text is rendered from the tokens: each literal is copied byte for byte
between its quotes, names are quoted in the engine's own way, and only the spaces
between tokens are chosen here. Statement separators, comments, backslashes,
sub-queries, control characters, digits other than 0-9 and nesting deeper than
:data:`MAX_DEPTH` are refused, so a predicate cannot carry any other SQL and cannot
exhaust the parser.

Grammar (keywords in any case)::

    expr      := and ("OR" and)*
    and       := not ("AND" not)*
    not       := "NOT" not | test
    test      := sum [cmp sum | ["NOT"] "IN" "(" sum ("," sum)* ")"
                      | ["NOT"] "BETWEEN" sum "AND" sum | "IS" ["NOT"] "NULL"
                      | ["NOT"] "LIKE" string]
    sum       := product (("+" | "-") product)*
    product   := unary (("*" | "/" | "%") unary)*
    unary     := "-" unary | primary
    primary   := number | string | TRUE | FALSE | NULL | DATE string | TIMESTAMP string
               | column | function "(" [sum ("," sum)*] ")" | "(" expr ")"

Columns are bare names (letters A-Z, digits 0-9, underscore) or double-quoted names.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
import unicodedata
from collections.abc import Iterable, Mapping
from dataclasses import dataclass

from ..engine.errors import PredicateError, closest_names, preview

__all__ = ["KINDS", "MAX_DEPTH", "Predicate", "parse_predicate"]

#: The kinds of column a condition can use; "other" columns cannot be compared.
KINDS = ("number", "text", "date", "timestamp", "boolean", "other")
#: Deepest nesting of brackets, NOT and unary minus a condition may have.
MAX_DEPTH = 64
_MAX_TOKENS = 20_000

# name: (argument kinds (None = same kind as the first), min args, max args, result kind (None = argument kind))
_FUNCTIONS: dict[str, tuple[tuple[str, ...] | None, int, int, str | None]] = {
    "abs": (("number",), 1, 1, "number"),
    "round": (("number",), 1, 2, "number"),
    "lower": (("text",), 1, 1, "text"),
    "upper": (("text",), 1, 1, "text"),
    "trim": (("text",), 1, 1, "text"),
    "length": (("text",), 1, 1, "number"),
    "coalesce": (None, 1, 64, None),
    "year": (("date", "timestamp"), 1, 1, "number"),
    "month": (("date", "timestamp"), 1, 1, "number"),
    "day": (("date", "timestamp"), 1, 1, "number"),
    "hour": (("date", "timestamp"), 1, 1, "number"),
}
FUNCTIONS = tuple(_FUNCTIONS)
_KEYWORDS = {"and", "or", "not", "in", "between", "is", "null", "true", "false", "like", "date", "timestamp"}
_TOKEN = re.compile(
    r"""(?:
        (?P<number>[0-9]+(?:\.[0-9]*)?(?:[eE][-+]?[0-9]+)?|\.[0-9]+(?:[eE][-+]?[0-9]+)?)
      | (?P<string>'[^']*')
      | (?P<quoted>"[^"]+")
      | (?P<name>[A-Za-z_][A-Za-z0-9_]*)
      | (?P<op><>|!=|<=|>=|=|<|>|\+|-|\*|/|%|\(|\)|,)
    )""",
    re.VERBOSE | re.ASCII,
)
_CMP = {"=", "<>", "!=", "<", "<=", ">", ">="}
_DATE = re.compile(r"[0-9]{4}-[0-9]{2}-[0-9]{2}", re.ASCII)
_TIMESTAMP = re.compile(r"[0-9]{4}-[0-9]{2}-[0-9]{2}(?:[ T][0-9]{2}:[0-9]{2}(?::[0-9]{2}(?:\.[0-9]{1,6})?)?)?",
                        re.ASCII)
_WORD = {"number": "a number", "text": "text", "date": "a date", "timestamp": "a timestamp",
         "boolean": "true/false", "null": "NULL", "other": "a type conditions cannot use"}


@dataclass(frozen=True)
class _Tok:
    kind: str  # number, string, column, func, kw, op
    text: str


@dataclass(frozen=True)
class Predicate:
    """A checked predicate: the user's text and its tokens (columns marked as such).

    ``render('duckdb')`` and ``render('spark')`` give the same expression with column
    names quoted for that engine; every literal is reproduced exactly.
    """

    text: str
    tokens: tuple[_Tok, ...]
    columns: tuple[str, ...]

    def render(self, dialect: str = "duckdb", column_sql: Mapping[str, str] | None = None) -> str:
        """The condition as engine text, built token by token.

        ``column_sql`` replaces a column reference by an engine expression (e.g. the
        numeric reading of a response the engine holds as text).
        """
        out: list[str] = []
        prev: _Tok | None = None
        for t in self.tokens:
            if t.kind == "column":
                piece = (column_sql or {}).get(t.text) or _quote(t.text, dialect)
            elif t.kind == "kw":
                piece = t.text.upper()
            else:  # numbers, strings (byte for byte), functions, operators
                piece = t.text
            glue = prev is None or (prev.kind == "op" and prev.text == "(") or (
                t.kind == "op" and t.text in (")", ",")) or (t.kind == "op" and t.text == "(" and prev.kind == "func")
            out.append(piece if glue else " " + piece)
            prev = t
        return "".join(out)

    def __str__(self) -> str:
        return self.render("duckdb")


def _quote(name: str, dialect: str) -> str:
    if dialect == "spark":
        return "`" + name.replace("`", "``") + "`"
    return '"' + name.replace('"', '""') + '"'


def _short(text: str) -> str:
    return text if len(text) <= 80 else text[:60] + f"... ({len(text)} characters)"


def _refuse(text: str, why: str) -> PredicateError:
    return PredicateError(
        f"predicate {_short(text)!r} refused: {why}. Write a condition on columns, e.g. "
        "\"temperature > 80 AND line IN ('L3', 'L4')\""
    )


def _unreadable(text: str, s: str, pos: int) -> PredicateError:
    ch = s[pos]
    code = f"U+{ord(ch):04X}"
    if ch.isdigit() or unicodedata.category(ch) == "Nd":
        return _refuse(text, f"{ch!r} ({code}, {unicodedata.name(ch, 'a digit')}) is not one of the digits 0-9; "
                       "write numbers with 0-9")
    if unicodedata.category(ch).startswith("C"):
        return _refuse(text, f"it contains a control character ({code})")
    if ord(ch) > 127:
        start = pos
        while start > 0 and (s[start - 1].isalnum() or s[start - 1] == "_"):
            start -= 1
        end = pos
        while end < len(s) and (s[end].isalnum() or s[end] == "_"):
            end += 1
        word = s[start:end] or ch
        return _refuse(text, f"{word!r} has the character {ch!r} ({code}); names with characters other than "
                       f"A-Z, a-z, 0-9 and _ go in double quotes, e.g. \"{word}\"")
    return _refuse(text, f"cannot read it from {s[pos:pos + 12].strip()!r} on")


def _tokenize(text: str, columns: Iterable[str]) -> list[_Tok]:
    for bad, what in ((";", "';' (one condition only, no statements)"), ("--", "comments ('--')"),
                      ("/*", "comments ('/*')"), ("\\", "backslashes"), ("`", "backquotes")):
        if bad in text:
            raise _refuse(text, f"it contains {what}")
    cols = [str(c) for c in columns]
    lower_cols = {c.lower(): c for c in cols}
    out: list[_Tok] = []
    pos = 0
    n = len(text)
    while True:
        while pos < n and text[pos].isspace():
            pos += 1
        if pos >= n:
            break
        m = _TOKEN.match(text, pos)
        if not m:
            raise _unreadable(text, text, pos)
        kind = m.lastgroup or ""
        val = m.group(kind)
        pos = m.end()
        if pos < n and ord(text[pos]) > 127 and not text[pos].isspace() and kind in ("number", "name"):
            raise _unreadable(text, text, pos)
        if kind == "quoted":
            name = val[1:-1]
            if name not in cols:
                near = closest_names(name, cols)
                hint = f" (did you mean {preview(near)}?)" if near else ""
                raise _refuse(text, f"{name!r} is not a column of the table{hint}")
            out.append(_Tok("column", name))
        elif kind == "name":
            low = val.lower()
            follows_bracket = text[pos:].lstrip().startswith("(")
            if low in _FUNCTIONS and follows_bracket:
                out.append(_Tok("func", low))
            elif val in cols or (low in lower_cols and low not in _KEYWORDS):
                out.append(_Tok("column", val if val in cols else lower_cols[low]))
            elif low in _KEYWORDS:
                out.append(_Tok("kw", low))
            elif low in _FUNCTIONS:
                out.append(_Tok("func", low))
            else:
                near = closest_names(val, cols)
                hint = f" (did you mean {preview(near)}?)" if near else ""
                raise _refuse(
                    text, f"{val!r} is not a column of the table nor an allowed function{hint}; "
                    f"columns: {preview(cols, 12)}; functions: {', '.join(FUNCTIONS)}"
                )
        elif kind == "string":
            bad_chars = [c for c in val if unicodedata.category(c) == "Cc" and c not in "\t\n\r"]
            if bad_chars:
                raise _refuse(text, f"the text value {_short(val)!r} contains a control character "
                              f"(U+{ord(bad_chars[0]):04X})")
            if out and out[-1].kind == "string":
                raise _refuse(text, "two quoted values in a row: text values cannot contain a single quote (')")
            out.append(_Tok("string", val))
        elif kind == "number":
            if not math.isfinite(float(val)):
                raise _refuse(text, f"{val} is not a finite number")
            out.append(_Tok("number", val))
        else:
            out.append(_Tok(kind, val))
        if len(out) > _MAX_TOKENS:
            raise _refuse(text, f"it has more than {_MAX_TOKENS} parts; split it into several conditions")
    if not out:
        raise _refuse(text, "it is empty")
    return out


@dataclass(frozen=True)
class _Val:
    """The kind of a sub-expression, and what to call it in a message."""

    kind: str  # one of KINDS, "null", or "any" (column kinds unknown)
    column: str | None = None  # set when the value is a column as it stands
    literal: str | None = None  # set when the value is a literal as written

    def describe(self, types: Mapping[str, str]) -> str:
        word = _WORD.get(self.kind, "a value")
        if self.column is not None:
            if self.kind == "other":
                return f"column {self.column!r} (type {types.get(self.column, 'unknown')})"
            return f"column {self.column!r} ({word})"
        if self.literal is not None:
            return f"{self.literal} ({word})"
        return f"an expression giving {word}"


_ANY = _Val("any")


class _Parser:
    """Recursive-descent check of the grammar in the module docstring, with kinds."""

    def __init__(self, text: str, toks: list[_Tok], kinds: Mapping[str, str] | None,
                 types: Mapping[str, str] | None) -> None:
        self.text, self.toks, self.i = text, toks, 0
        self.kinds = kinds
        self.types = types or {}
        self.depth = 0

    # -------------------------------------------------------------- helpers
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

    def deeper(self) -> None:
        self.depth += 1
        if self.depth > MAX_DEPTH:
            raise _refuse(self.text, f"it is nested too deep (more than {MAX_DEPTH} levels of brackets, NOT or "
                          "minus signs); write it flatter, e.g. with AND/OR between simple comparisons")

    def fail(self, why: str) -> PredicateError:
        return _refuse(self.text, why)

    def d(self, v: _Val) -> str:
        return v.describe(self.types)

    def need(self, v: _Val, kinds: tuple[str, ...], where: str) -> None:
        """Refuse ``v`` unless its kind is one of ``kinds``."""
        if v.kind == "any" or v.kind in kinds:
            return
        wanted = " or ".join(_WORD[k] for k in kinds)
        raise self.fail(f"{where} needs {wanted}, not {self.d(v)}")

    def condition(self, v: _Val, where: str) -> None:
        """A value used as a condition must be true/false."""
        if v.kind in ("any", "boolean"):
            return
        if v.column is not None:
            hint = {"text": f"{v.column} = 'some value'", "number": f"{v.column} > 0",
                    "date": f"{v.column} = DATE '2026-01-31'"}.get(v.kind, f"{v.column} IS NULL")
            raise self.fail(f"{where} uses {self.d(v)} on its own, but a condition must be true/false; "
                            f"write a comparison such as {hint}")
        raise self.fail(f"{where} uses {self.d(v)}, but a condition must be true/false (a comparison)")

    def check_date(self, literal: str, kind: str, against: str) -> None:
        body = literal[1:-1]
        ok = False
        try:
            if kind == "date" and _DATE.fullmatch(body):
                _dt.date.fromisoformat(body)
                ok = True
            elif kind == "timestamp" and _TIMESTAMP.fullmatch(body):
                _dt.datetime.fromisoformat(body)
                ok = True
        except ValueError:
            ok = False
        if not ok:
            form = "YYYY-MM-DD" if kind == "date" else "YYYY-MM-DD HH:MM[:SS[.ffffff]]"
            raise self.fail(f"{literal} is not a valid {kind} {against}(write {form} with a real calendar "
                            "day and time)")

    def comparable(self, a: _Val, b: _Val, op: str) -> None:
        """Refuse a comparison whose sides have kinds that do not compare."""
        for v in (a, b):
            if v.kind == "null":
                raise self.fail(f"'{op} NULL' is never true (a missing value compares as unknown); "
                                "write IS NULL or IS NOT NULL")
            if v.kind == "other":
                raise self.fail(f"{self.d(v)} has a type that conditions cannot compare; compare another column "
                                "or cast it in the data")
        if a.kind == "any" or b.kind == "any" or a.kind == b.kind:
            return
        times = ("date", "timestamp")
        if a.kind in times and b.kind in times:
            return
        for col, lit in ((a, b), (b, a)):
            if col.kind in times and lit.kind == "text" and lit.literal is not None:
                against = f"for {self.d(col)} " if col.column else ""
                self.check_date(lit.literal, col.kind, against)
                return
        hints = {
            ("text", "number"): "quote the value to compare text, e.g. '5'",
            ("number", "text"): "leave the quotes off a number, e.g. 5",
            ("date", "number"): "compare with a date, e.g. DATE '2026-01-31'",
            ("timestamp", "number"): "compare with a timestamp, e.g. TIMESTAMP '2026-01-31 08:00'",
        }
        hint = hints.get((a.kind, b.kind)) or hints.get((b.kind, a.kind)) or "compare values of the same kind"
        raise self.fail(f"'{op}' compares {self.d(a)} with {self.d(b)}; {hint}")

    # -------------------------------------------------------------- grammar
    def parse(self) -> None:
        v = self.expr()
        if self.i < len(self.toks):
            raise self.fail(f"unexpected {self.toks[self.i].text!r}")
        self.condition(v, "the condition")

    def expr(self) -> _Val:
        v = self.conj()
        while self.peek("kw", "or"):
            self.i += 1
            self.condition(v, "OR")
            w = self.conj()
            self.condition(w, "OR")
            v = _Val("boolean")
        return v

    def conj(self) -> _Val:
        v = self.neg()
        while self.peek("kw", "and"):
            self.i += 1
            self.condition(v, "AND")
            w = self.neg()
            self.condition(w, "AND")
            v = _Val("boolean")
        return v

    def neg(self) -> _Val:
        if self.peek("kw", "not"):
            self.i += 1
            self.deeper()
            v = self.neg()
            self.depth -= 1
            self.condition(v, "NOT")
            return _Val("boolean")
        return self.test()

    def test(self) -> _Val:
        left = self.sum()
        if self.peek("op") and self.toks[self.i].text in _CMP:
            op = self.toks[self.i].text
            self.i += 1
            right = self.sum()
            self.comparable(left, right, op)
            return _Val("boolean")
        if self.peek("kw", "is"):
            self.i += 1
            if self.peek("kw", "not"):
                self.i += 1
            self.take("kw", "null", "NULL after IS")
            return _Val("boolean")
        if self.peek("kw", "not"):
            self.i += 1
            if not (self.peek("kw", "in") or self.peek("kw", "between") or self.peek("kw", "like")):
                raise self.fail("NOT here must be followed by IN, BETWEEN or LIKE")
        if self.peek("kw", "in"):
            self.i += 1
            self.take("op", "(", "'(' after IN")
            self.comparable(left, self.sum(), "IN")
            while self.peek("op", ","):
                self.i += 1
                self.comparable(left, self.sum(), "IN")
            self.take("op", ")", "')' closing the IN list")
            return _Val("boolean")
        if self.peek("kw", "between"):
            self.i += 1
            self.comparable(left, self.sum(), "BETWEEN")
            self.take("kw", "and", "AND in BETWEEN ... AND ...")
            self.comparable(left, self.sum(), "BETWEEN")
            return _Val("boolean")
        if self.peek("kw", "like"):
            self.i += 1
            self.take("string", what="a quoted pattern after LIKE")
            self.need(left, ("text",), "LIKE")
            return _Val("boolean")
        return left

    def arithmetic(self, a: _Val, b: _Val, op: str) -> _Val:
        self.need(a, ("number",), f"arithmetic ('{op}')")
        self.need(b, ("number",), f"arithmetic ('{op}')")
        return _Val("number" if "any" not in (a.kind, b.kind) else "any")

    def sum(self) -> _Val:
        v = self.product()
        while self.peek("op", "+") or self.peek("op", "-"):
            op = self.toks[self.i].text
            self.i += 1
            v = self.arithmetic(v, self.product(), op)
        return v

    def product(self) -> _Val:
        v = self.unary()
        while self.peek("op", "*") or self.peek("op", "/") or self.peek("op", "%"):
            op = self.toks[self.i].text
            self.i += 1
            v = self.arithmetic(v, self.unary(), op)
        return v

    def unary(self) -> _Val:
        if self.peek("op", "-"):
            self.i += 1
            self.deeper()
            v = self.unary()
            self.depth -= 1
            self.need(v, ("number",), "a minus sign")
            return _Val("number" if v.kind != "any" else "any", literal=None if v.literal is None else "-" + v.literal)
        return self.primary()

    def primary(self) -> _Val:
        t = self.toks[self.i] if self.i < len(self.toks) else None
        if t is None:
            raise self.fail("expected a column, value or '(' but found the end")
        if t.kind == "number":
            self.i += 1
            return _Val("number", literal=t.text)
        if t.kind == "string":
            self.i += 1
            return _Val("text", literal=t.text)
        if t.kind == "column":
            self.i += 1
            if self.kinds is None:
                return _Val("any", column=t.text)
            return _Val(self.kinds.get(t.text, "other"), column=t.text)
        if t.kind == "kw" and t.text in ("true", "false"):
            self.i += 1
            return _Val("boolean", literal=t.text.upper())
        if t.kind == "kw" and t.text == "null":
            self.i += 1
            return _Val("null", literal="NULL")
        if t.kind == "kw" and t.text in ("date", "timestamp"):
            self.i += 1
            lit = self.take("string", what="a quoted date after DATE/TIMESTAMP").text
            self.check_date(lit, t.text, "")
            return _Val(t.text, literal=f"{t.text.upper()} {lit}")
        if t.kind == "func":
            return self.call()
        if t.kind == "op" and t.text == "(":
            self.i += 1
            self.deeper()
            v = self.expr()
            self.depth -= 1
            self.take("op", ")", "a closing ')'")
            return _Val(v.kind, column=v.column, literal=v.literal)
        raise self.fail(f"expected a column, value or '(' but found {t.text!r}")

    def call(self) -> _Val:
        name = self.toks[self.i].text
        self.i += 1
        self.take("op", "(", "'(' after a function name")
        self.deeper()
        args: list[_Val] = []
        if not self.peek("op", ")"):
            args.append(self.sum())
            while self.peek("op", ","):
                self.i += 1
                args.append(self.sum())
        self.depth -= 1
        self.take("op", ")", "')' closing the function call")
        kinds, lo, hi, result = _FUNCTIONS[name]
        if not lo <= len(args) <= hi:
            count = f"{lo} argument" + ("s" if lo > 1 else "") if lo == hi else f"{lo} to {hi} arguments"
            raise self.fail(f"{name}() takes {count}, not {len(args)}")
        if kinds is None:  # coalesce: every argument of one kind
            first = next((a for a in args if a.kind not in ("any", "null")), _ANY)
            for a in args:
                if a.kind not in ("any", "null") and a.kind != first.kind:
                    raise self.fail(f"{name}() mixes {self.d(first)} and {self.d(a)}; give it values of one kind")
            return _Val(first.kind)
        self.need(args[0], kinds, f"{name}()")
        for extra in args[1:]:
            self.need(extra, ("number",), f"the second argument of {name}()")
        return _Val(result or args[0].kind)


def _kinds(columns: Iterable[str] | Mapping[str, str]) -> tuple[list[str], Mapping[str, str] | None]:
    if isinstance(columns, Mapping):
        kinds = {str(c): str(k) for c, k in columns.items()}
        return list(kinds), kinds
    return [str(c) for c in columns], None


def parse_predicate(text: str, columns: Iterable[str] | Mapping[str, str],
                    types: Mapping[str, str] | None = None) -> Predicate:
    """Check ``text`` against the grammar and the table's columns; raise :class:`PredicateError` if refused.

    ``columns`` is either the column names (grammar and names checked) or a mapping from
    each name to its kind (one of :data:`KINDS`; comparisons, functions and operators
    are type-checked too). ``types`` are the engine's own type names, for messages.
    """
    if not isinstance(text, str):
        raise PredicateError(f"a predicate is text such as \"temperature > 80\", not {type(text).__name__}")
    names, kinds = _kinds(columns)
    toks = _tokenize(text, names)
    _Parser(text, toks, kinds, types).parse()
    used = tuple(dict.fromkeys(t.text for t in toks if t.kind == "column"))
    if not used:
        raise _refuse(text, "it names no column, so it would keep or drop every row alike")
    return Predicate(text=text.strip(), tokens=tuple(toks), columns=used)
