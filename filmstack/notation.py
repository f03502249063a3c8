"""H/L quarter-wave notation: a parser and a formatter.

A design such as ``"(HL)^7 H"`` lists layers in *deposition order* (the first symbol touches the
substrate), like the ``layers`` list of a stack file. Each symbol stands for one quarter-wave
optical thickness (QWOT) of its material at the stack's reference wavelength; a factor in front
scales it (``0.5H`` is an eighth wave, ``2L`` a half wave).

Grammar (whitespace is allowed between any two tokens)::

    design   := sequence
    sequence := item { item }
    item     := factor? SYMBOL power?          a (scaled) quarter wave, possibly repeated
              | "(" sequence ")" power?         a group, possibly repeated
    factor   := DIGITS [ "." DIGITS* ] | "." DIGITS           a number > 0, no exponent
    power    := "^" DIGITS                     a whole number >= 1
    SYMBOL   := one ASCII letter (case matters): "H", "L", "M", "h", ...

Decisions (common practice, no published source for the exact rules):

- A symbol is a single letter, so ``HL`` is two layers and ``2H`` reads unambiguously.
- A factor applies to one symbol only: ``2(HL)`` is refused (is it a repeat or a scaling?);
  write ``(HL)^2`` or ``2H 2L``.
- ``0.5H^3`` is three layers of 0.5 QWOT each.
- Exponents in factors (``1e-1H``) are refused: ``e`` could be a symbol.
- Adjacent layers of the same symbol are kept as written, never merged.

The parser is a hand-written recursive-descent parser (no ``eval``). Its errors are
:class:`NotationError` (an :class:`~filmstack.errors.InputError`) that give the 1-based column and
a caret line under the text.

References: H. A. Macleod, *Thin-Film Optical Filters*, 4th ed. (CRC Press, 2010), ch. 5 (the H/L
notation for quarter-wave stacks).
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from decimal import Decimal

from .errors import InputError

__all__ = [
    "NotationError",
    "parse_notation",
    "format_notation",
    "notation_layers",
    "check_symbol_name",
    "MAX_NOTATION_LAYERS",
]

#: Largest number of layers a notation may expand to (guards ``(HL)^1000000000``).
MAX_NOTATION_LAYERS = 100_000

_LETTERS = frozenset("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz")
_DIGITS = frozenset("0123456789")


class NotationError(InputError):
    """A malformed H/L notation string.

    Attributes
    ----------
    text
        The notation as given.
    column
        1-based column of the problem in ``text`` (``None`` when it concerns the whole text).
    """

    def __init__(self, message: str, *, text: str = "", column: int | None = None,
                 file: str | None = None, key: str | None = None, line: int | None = None):
        self.text = text
        self.column = column
        super().__init__(message, file=file, key=key, line=line)


def check_symbol_name(name) -> str:
    """``name`` if it is a valid notation symbol (one ASCII letter); else an InputError."""
    if not (isinstance(name, str) and len(name) == 1 and name in _LETTERS):
        raise InputError(f"a notation symbol must be a single letter (A-Z or a-z), got {name!r}")
    return name


class _Parser:
    """Recursive-descent parser over the characters of one notation string."""

    def __init__(self, text: str, symbols: Iterable[str], key: str | None):
        self.text = text
        self.symbols = list(symbols)
        self.known = set(self.symbols)
        self.key = key
        self.pos = 0

    # -- errors -----------------------------------------------------------------------------
    def error(self, what: str, pos: int | None = None, hint: str = "") -> NotationError:
        """An error at 0-based ``pos``: '<what> at column C: "<text>"; <hint>' and a caret line."""
        pos = self.pos if pos is None else pos
        col = pos + 1
        full = (f"{what} at column {col}: \"{self.text}\"" + (f"; {hint}" if hint else "")
                + f"\n    {self.text}\n    {' ' * pos}^")
        return NotationError(full, text=self.text, column=col, key=self.key)

    # -- lexing helpers ---------------------------------------------------------------------
    def skip_ws(self) -> None:
        while self.pos < len(self.text) and self.text[self.pos].isspace():
            self.pos += 1

    def peek(self) -> str:
        self.skip_ws()
        return self.text[self.pos] if self.pos < len(self.text) else ""

    def describe(self, ch: str) -> str:
        return "the end of the text" if ch == "" else repr(ch)

    # -- grammar ----------------------------------------------------------------------------
    def parse(self) -> list[tuple[str, float]]:
        if not self.text.strip():
            raise NotationError(
                "the notation is empty: expected symbols such as \"(HL)^7 H\"",
                text=self.text, column=None, key=self.key)
        tree = self.sequence(top=True)
        if self.peek() != "":  # only a stray ')' can stop the top-level sequence early
            raise self.error(f"unexpected {self.describe(self.peek())}",
                             hint="no '(' is open here")
        total = _count(tree)
        if total > MAX_NOTATION_LAYERS:
            raise NotationError(
                f"the notation expands to {total} layers, more than the limit of "
                f"{MAX_NOTATION_LAYERS}: check the powers (^N)", text=self.text, key=self.key)
        out: list[tuple[str, float]] = []
        _expand(tree, out)
        return out

    def sequence(self, top: bool = False, open_pos: int | None = None) -> list:
        """Items until the end of the text (top) or a ')' (inside a group)."""
        items = []
        while True:
            ch = self.peek()
            if ch == "" or ch == ")":
                break
            items.append(self.item())
        if not items and not top:
            raise self.error("empty group '()'", open_pos,
                             hint="expected symbols inside the parentheses")
        return items

    def item(self):
        ch = self.peek()
        start = self.pos
        if ch == "(":
            self.pos += 1
            inner = self.sequence(open_pos=start)
            if self.peek() != ")":
                raise self.error("unclosed '('", start, hint="expected a ')' to close it")
            self.pos += 1
            return ("group", inner, self.power())
        factor = 1.0
        if ch in _DIGITS or ch == ".":
            factor = self.factor()
            ch = self.peek()
            if ch == "(":
                raise self.error(
                    "factor before a group", start,
                    hint="a factor applies to a single symbol: write it before each symbol "
                         "(2H 2L), or repeat a group with a power ((HL)^2)")
            if ch in "eE" and self.text[self.pos + 1:self.pos + 2] in tuple("+-0123456789"):
                raise self.error("exponent in a factor", start,
                                 hint="write the factor as a plain decimal such as 0.001H")
            if ch not in _LETTERS:
                word = self.text[start:self.pos].strip()
                hint = f"expected a symbol after it, found {self.describe(ch)}"
                if self._after_item(start) and word.isdigit():
                    hint += f"; a power is written with ^, as in (HL)^{word}"
                raise self.error(f"factor {word} without a symbol", start, hint=hint)
        if ch in _LETTERS:
            if ch not in self.known:
                hint = self._unknown(ch)
                nxt = self.text[self.pos + 1:self.pos + 2]
                if ch in "xX" and nxt.isdigit() and self._after_item(self.pos):
                    hint += f"; a power is written with ^, as in (HL)^{nxt}"
                raise self.error(f"unknown symbol '{ch}'", hint=hint)
            self.pos += 1
            return ("layer", ch, factor, self.power())
        if ch == "^":
            raise self.error("unexpected '^'",
                             hint="a power must follow a symbol or a group, as in H^3 or (HL)^7")
        hint = (f"expected a symbol ({', '.join(self.symbols) or 'none defined'}), "
                "a factor or '('")
        if ch == "*" and self._after_item(self.pos):
            hint = "a power is written with ^, as in (HL)^7"
        raise self.error(f"unexpected {self.describe(ch)}", hint=hint)

    def factor(self) -> float:
        start = self.pos
        t = self.text
        while self.pos < len(t) and t[self.pos] in _DIGITS:
            self.pos += 1
        if self.pos < len(t) and t[self.pos] == ".":
            self.pos += 1
            while self.pos < len(t) and t[self.pos] in _DIGITS:
                self.pos += 1
        word = t[start:self.pos]
        if word == "." or (self.pos < len(t) and t[self.pos] == "."):
            # "." alone, or a second decimal point as in "1.2.3H"
            end = self.pos
            while end < len(t) and (t[end] in _DIGITS or t[end] == "."):
                end += 1
            raise self.error(f"bad factor {t[start:end]!r}", start,
                             hint="expected a number such as 0.5 or 2")
        value = float(word)
        if not (math.isfinite(value) and value > 0):
            raise self.error(f"bad factor {word!r}", start, hint="a factor must be a number > 0")
        return value

    def power(self) -> int:
        if self.peek() != "^":
            return 1
        caret = self.pos
        self.pos += 1
        ch = self.peek()
        start = self.pos
        if ch == "":
            raise self.error("missing power after '^'", caret,
                             hint="expected a whole number such as ^7")
        if ch in "+-" or ch in _DIGITS or ch == ".":
            end = start + 1
            while end < len(self.text) and (self.text[end] in _DIGITS or self.text[end] == "."):
                end += 1
            word = self.text[start:end]
            if word.isdigit() and int(word) >= 1:
                self.pos = end
                return int(word)
            raise self.error(f"bad power {word!r}", start,
                             hint="a power must be a whole number >= 1")
        raise self.error("missing power after '^'", caret,
                         hint=f"expected a whole number such as ^7, found {self.describe(ch)}")

    def _after_item(self, pos: int) -> bool:
        """True if a group or a symbol ends just before ``pos`` (where a power could follow)."""
        before = self.text[:pos].rstrip()
        return bool(before) and (before[-1] == ")" or before[-1] in self.known)

    def _unknown(self, ch: str) -> str:
        known = ", ".join(self.symbols) if self.symbols else "none"
        msg = f"known symbols: {known}"
        close = [s for s in self.symbols if s.lower() == ch.lower()]
        if close:
            msg += f"; did you mean '{close[0]}'? (symbols are case-sensitive)"
        return msg


def _count(tree) -> int:
    n = 0
    for node in tree:
        if node[0] == "layer":
            n += node[3]
        else:
            n += _count(node[1]) * node[2]
    return n


def _expand(tree, out: list) -> None:
    for node in tree:
        if node[0] == "layer":
            out.extend([(node[1], node[2])] * node[3])
        else:
            inner: list = []
            _expand(node[1], inner)
            out.extend(inner * node[2])


def parse_notation(text: str, symbols: Iterable[str], *,
                   key: str | None = "design") -> list[tuple[str, float]]:
    """Parse H/L notation into a flat list of layers.

    Parameters
    ----------
    text
        The notation, e.g. ``"(HL)^7 H"`` or ``"0.5L H 0.5L"``; deposition order.
    symbols
        The known symbols (e.g. the keys of a ``symbols:`` mapping), single letters.
    key
        The key path reported in errors (``"design"``, ``"back_design"``, ``"start"``).

    Returns
    -------
    list of (symbol, factor)
        One entry per layer in deposition order; ``factor`` in QWOT (1.0 for a plain symbol).

    Raises
    ------
    NotationError
        With the 1-based column of the problem and a caret line.
    """
    if not isinstance(text, str):
        raise NotationError(f"expected the notation as text such as \"(HL)^7 H\", "
                            f"got {type(text).__name__} {text!r}", text=str(text), key=key)
    syms = list(symbols)
    for s in syms:
        try:
            check_symbol_name(s)
        except InputError as exc:
            raise NotationError(exc.message, text=text, key=key) from None
    return _Parser(text, syms, key).parse()


def _format_factor(x: float) -> str:
    """Shortest decimal that reads back as exactly ``x``, without an exponent."""
    s = format(Decimal(repr(float(x))), "f")
    if "." in s:
        s = s.rstrip("0").rstrip(".")
    return s


def _format_item(symbol: str, factor: float) -> str:
    if factor == 1.0:
        return symbol
    return _format_factor(factor) + symbol


def _join(tokens: Sequence[str]) -> str:
    """Join tokens; bare symbols next to each other are written without a space (``HL``)."""
    out = ""
    prev_bare = False
    for tok in tokens:
        bare = len(tok) == 1 and tok in _LETTERS
        if out:
            out += "" if (bare and prev_bare) else " "
        out += tok
        prev_bare = bare
    return out


def format_notation(items: Iterable[tuple[str, float]], *, compact: bool = True,
                    max_period: int = 16) -> str:
    """Write a list of (symbol, factor) as notation; the inverse of :func:`parse_notation`.

    Parameters
    ----------
    items
        (symbol, factor) pairs in deposition order; symbols single letters, factors > 0.
    compact
        Write repeats as powers: ``H L H L H L`` becomes ``(HL)^3``; a run of one symbol becomes
        ``H^3`` (two in a row stay ``HH``). Greedy, one level of grouping, periods up to
        ``max_period`` items.

    Returns
    -------
    str, such that ``parse_notation(format_notation(x), symbols) == x`` exactly (factors are
    written with the shortest decimal that reads back as the same float).
    """
    seq = []
    for sym, factor in items:
        check_symbol_name(sym)
        f = float(factor)
        if not (math.isfinite(f) and f > 0):
            raise InputError(f"a notation factor must be a finite number > 0, got {factor!r}")
        seq.append((sym, f))
    if not compact:
        return _join([_format_item(s, f) for s, f in seq])
    tokens = []
    i, n = 0, len(seq)
    while i < n:
        best_p, best_c = 1, 1
        for p in range(1, min(max_period, (n - i) // 2) + 1):
            unit = seq[i:i + p]
            c = 1
            while seq[i + c * p:i + (c + 1) * p] == unit:
                c += 1
            if c >= 2 and p * c > best_p * best_c:
                best_p, best_c = p, c
        if best_c == 1 or (best_p == 1 and best_c == 2):
            tokens.append(_format_item(*seq[i]))
            i += 1
            continue
        unit = seq[i:i + best_p]
        if best_p == 1:
            s, f = unit[0]
            body = s if f == 1.0 else f"({_format_item(s, f)})"
        else:
            body = "(" + _join([_format_item(s, f) for s, f in unit]) + ")"
        tokens.append(f"{body}^{best_c}")
        i += best_p * best_c
    return _join(tokens)


def notation_layers(text: str, materials: Mapping, reference_nm: float, *,
                    key: str | None = "design") -> list:
    """Layers (:class:`~filmstack.stack.Layer`) of a notation string.

    Parameters
    ----------
    text
        The notation, deposition order.
    materials
        Symbol -> :class:`~filmstack.materials.Material`.
    reference_nm
        Wavelength (nm) at which a symbol is one quarter wave (normal incidence).
    key
        Key path for error messages.

    Returns
    -------
    list of Layer, thickness d = factor · λ_ref / (4 n(λ_ref)) each (``qwot_to_nm``).
    """
    from .stack import Layer, qwot_to_nm

    items = parse_notation(text, materials.keys(), key=key)
    return [Layer(materials[s], qwot_to_nm(f, materials[s], reference_nm)) for s, f in items]
