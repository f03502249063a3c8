"""Tests of the H/L quarter-wave notation parser and formatter (filmstack.notation)."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from filmstack.errors import InputError
from filmstack.materials import Constant
from filmstack.notation import (
    MAX_NOTATION_LAYERS,
    NotationError,
    format_notation,
    notation_layers,
    parse_notation,
)

HL = ("H", "L")


def flat(text, symbols=HL):
    return parse_notation(text, symbols)


class TestParse:
    def test_quarter_wave_mirror_in_deposition_order(self):
        # (HL)^7 H: 15 quarter waves, the first symbol touches the substrate (DESIGN.md §3).
        items = flat("(HL)^7 H")
        assert len(items) == 15
        assert [s for s, _ in items] == ["H", "L"] * 7 + ["H"]
        assert all(f == 1.0 for _, f in items)

    def test_factors_scale_single_symbols(self):
        assert flat("0.5H 2L 1.25 H .5L 3.H") == [("H", 0.5), ("L", 2.0), ("H", 1.25),
                                                   ("L", 0.5), ("H", 3.0)]

    def test_whitespace_is_optional(self):
        assert flat("( H L ) ^ 2   0.5 H") == flat("(HL)^2 0.5H") == flat("(HL)^2(0.5H)")

    def test_power_then_factor_needs_a_separator(self):
        # "^20.5H" cannot mean "^2 0.5H": the digits are read as one (bad) power.
        with pytest.raises(NotationError, match="bad power '20.5'"):
            flat("(HL)^20.5H")

    def test_nested_groups_and_powers(self):
        expected = (["H"] + ["L", "H"] * 2) * 3 + ["L"]
        assert [s for s, _ in flat("(H(LH)^2)^3 L")] == expected

    def test_power_on_a_scaled_symbol_repeats_that_layer(self):
        assert flat("0.5H^3") == [("H", 0.5)] * 3

    def test_adjacent_same_symbols_are_kept_not_merged(self):
        assert flat("HH 2H") == [("H", 1.0), ("H", 1.0), ("H", 2.0)]

    def test_symbols_are_case_sensitive_and_any_letter(self):
        assert flat("HhM", symbols=("H", "h", "M")) == [("H", 1.0), ("h", 1.0), ("M", 1.0)]

    def test_symbols_must_be_single_letters(self):
        with pytest.raises(InputError, match="single letter"):
            parse_notation("H", ["H1"])

    def test_result_is_an_input_error_subclass(self):
        assert issubclass(NotationError, InputError)
        assert issubclass(NotationError, ValueError)


# (text, 1-based column, words the message must contain). Each a real mistake.
MISTAKES = [
    ("(HL))^7 H", 5, ["unexpected ')'", "no '(' is open"]),
    ("(HL", 1, ["unclosed '('"]),
    ("(H(L)", 1, ["unclosed '('"]),
    ("HLM", 3, ["unknown symbol 'M'", "known symbols: H, L"]),
    ("hL", 1, ["unknown symbol 'h'", "did you mean 'H'"]),
    ("(HL)^", 5, ["missing power after '^'"]),
    ("(HL)^ L", 5, ["missing power after '^'", "found 'L'"]),
    ("(HL)^0", 6, ["bad power '0'", "whole number >= 1"]),
    ("(HL)^1.5", 6, ["bad power '1.5'", "whole number >= 1"]),
    ("(HL)^-2", 6, ["bad power '-2'"]),
    ("H ()", 3, ["empty group '()'"]),
    ("1.2.3H", 1, ["bad factor '1.2.3'"]),
    ("0H", 1, ["bad factor '0'", "> 0"]),
    ("H .L", 3, ["bad factor '.'"]),
    ("2(HL)", 1, ["factor before a group", "(HL)^2"]),
    ("H 2", 3, ["factor 2 without a symbol"]),
    ("1e-3H", 1, ["exponent in a factor"]),
    ("H^2^3", 4, ["unexpected '^'"]),
    ("^3 H", 1, ["unexpected '^'"]),
    ("H*L", 2, ["unexpected '*'"]),
    ("H+L", 2, ["unexpected '+'"]),
    ("__import__('os')", 1, ["unexpected '_'"]),  # never eval: code is just bad notation
    # powers written the way other notations write them
    ("(HL)**7 H", 5, ["unexpected '*'", "a power is written with ^", "(HL)^7"]),
    ("(HL)x7", 5, ["unknown symbol 'x'", "a power is written with ^", "(HL)^7"]),
    ("(HL)7", 5, ["factor 7 without a symbol", "a power is written with ^", "(HL)^7"]),
]


class TestErrors:
    @pytest.mark.parametrize("text,column,words", MISTAKES, ids=[m[0] for m in MISTAKES])
    def test_message_points_at_the_column(self, text, column, words):
        with pytest.raises(NotationError) as info:
            flat(text)
        err = info.value
        assert err.column == column
        assert err.key == "design"
        msg = str(err)
        for w in words:
            assert w in msg, msg
        first, shown, caret = msg.split("\n")
        assert f'at column {column}: "{text}"' in first
        # the caret sits under the offending character of the echoed text
        assert shown.strip() == text.strip()
        assert caret.index("^") - shown.index(text[0]) == column - 1

    def test_key_is_configurable(self):
        with pytest.raises(NotationError) as info:
            parse_notation("X", HL, key="back_design")
        assert info.value.key == "back_design"
        assert "key 'back_design'" in str(info.value)

    @pytest.mark.parametrize("text", ["", "   "])
    def test_empty_notation(self, text):
        with pytest.raises(NotationError, match="empty"):
            flat(text)

    def test_not_text(self):
        with pytest.raises(NotationError, match="expected the notation as text"):
            parse_notation(7, HL)

    def test_expansion_limit(self):
        with pytest.raises(NotationError, match="layers, more than the limit"):
            flat("((HL)^1000)^1000")
        assert len(flat(f"H^{MAX_NOTATION_LAYERS}")) == MAX_NOTATION_LAYERS


class TestFormat:
    def test_compact_mirror(self):
        assert format_notation([("H", 1.0), ("L", 1.0)] * 7 + [("H", 1.0)]) == "(HL)^7 H"

    def test_plain(self):
        items = [("H", 0.5), ("L", 1.0), ("H", 0.5)]
        assert format_notation(items) == "0.5H L 0.5H"
        assert format_notation([("H", 1.0), ("L", 1.0)] * 2, compact=False) == "HLHL"

    def test_runs_of_one_symbol(self):
        assert format_notation([("H", 1.0)] * 2) == "HH"
        assert format_notation([("H", 1.0)] * 3) == "H^3"
        assert format_notation([("H", 0.5)] * 3) == "(0.5H)^3"

    def test_factor_written_exactly_without_exponent(self):
        f = 0.1 + 0.2  # 0.30000000000000004: needs all 17 digits to read back exactly
        text = format_notation([("H", f), ("L", 1e-7), ("H", 1e22)])
        assert "e" not in text
        assert parse_notation(text, HL) == [("H", f), ("L", 1e-7), ("H", 1e22)]

    @pytest.mark.parametrize("bad", [0.0, -1.0, math.inf, math.nan])
    def test_bad_factor(self, bad):
        with pytest.raises(InputError, match="factor"):
            format_notation([("H", bad)])

    def test_bad_symbol(self):
        with pytest.raises(InputError, match="single letter"):
            format_notation([("HL", 1.0)])


# -- property tests -------------------------------------------------------------------------

SYMS = "HLMhA"
factors = st.one_of(
    st.just(1.0),
    st.sampled_from([0.5, 2.0, 1.25, 0.25]),
    st.floats(min_value=1e-6, max_value=1e6, allow_nan=False, allow_infinity=False)
    .filter(lambda x: x > 0),
)
items_st = st.lists(st.tuples(st.sampled_from(SYMS), factors), min_size=1, max_size=40)


@settings(max_examples=200, deadline=None)
@given(items=items_st, compact=st.booleans())
def test_parse_inverts_format(items, compact):
    assert parse_notation(format_notation(items, compact=compact), SYMS) == items


@settings(max_examples=200, deadline=None)
@given(items=st.lists(st.tuples(st.sampled_from("HL"), st.just(1.0)), min_size=1,
                      max_size=60))
def test_compact_format_roundtrips_periodic_designs(items):
    text = format_notation(items * 3)  # periodic: must be compressed and read back the same
    assert parse_notation(text, HL) == items * 3
    assert "^" in text


# Independent renderer: random trees written as text, expanded here without the parser.
def _tree(depth):
    leaf = st.tuples(st.just("layer"), st.sampled_from("HL"),
                     st.sampled_from([None, "0.5", "2", "1.25", ".75"]),
                     st.integers(1, 3))
    if depth == 0:
        return leaf
    group = st.tuples(st.just("group"), st.lists(_tree(depth - 1), min_size=1, max_size=3),
                      st.integers(1, 3))
    return st.one_of(leaf, group)


def _render(node, space):
    if node[0] == "layer":
        _, sym, fac, power = node
        body = (fac or "") + (" " if space and fac else "") + sym
    else:
        _, kids, power = node
        body = "(" + _join([_render(k, space) for k in kids], space) + ")"
    return body + (f"^{power}" if power > 1 else "")


def _join(parts, space):
    out = parts[0]
    for p in parts[1:]:
        # a power followed by a factor needs a space ("^2 0.5H"), else it reads as "^20.5"
        sep = " " if space or (out[-1].isdigit() and (p[0].isdigit() or p[0] == ".")) else ""
        out += sep + p
    return out


def _expand(node):
    if node[0] == "layer":
        _, sym, fac, power = node
        return [(sym, float(fac) if fac else 1.0)] * power
    _, kids, power = node
    inner = [x for k in kids for x in _expand(k)]
    return inner * power


@settings(max_examples=200, deadline=None)
@given(trees=st.lists(_tree(2), min_size=1, max_size=4), space=st.booleans())
def test_parser_matches_an_independent_expansion(trees, space):
    text = _join([_render(t, space) for t in trees], space)
    expected = [x for t in trees for x in _expand(t)]
    assert parse_notation(text, HL) == expected


class TestNotationLayers:
    def test_quarter_wave_thickness(self):
        # A quarter wave has optical thickness n·d = λ/4 (Macleod, Thin-Film Optical Filters,
        # 4th ed., §2.4): at 550 nm with n = 2.35, d = 550 / (4 · 2.35) = 58.5106... nm.
        hi = Constant(name="hi", n=2.35)
        lo = Constant(name="lo", n=1.46)
        layers = notation_layers("0.5H L 2H", {"H": hi, "L": lo}, 550.0)
        assert [l.material for l in layers] == [hi, lo, hi]
        assert layers[0].thickness_nm == pytest.approx(0.5 * 550 / (4 * 2.35), rel=1e-15)
        assert layers[1].thickness_nm == pytest.approx(550 / (4 * 1.46), rel=1e-15)
        assert layers[2].thickness_nm == pytest.approx(2 * 550 / (4 * 2.35), rel=1e-15)

    def test_unknown_symbol_lists_materials_symbols(self):
        with pytest.raises(NotationError, match="known symbols: H, L"):
            notation_layers("HM", {"H": Constant(name="a", n=2.0), "L": Constant(name="b", n=1.4)},
                            550.0)
