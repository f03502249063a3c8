"""Make the synthetic "measured" files of the fit examples (Larkspur Optics scenario).

Larkspur Optics, a small invented optics shop, grows thermal oxide on silicon wafers for a
customer and checks the oxide thickness with a reflectometer at normal incidence. The files made
here imitate such measurements. They are SYNTHETIC: computed with filmstack's own model (the
bundled SiO2 and Si optical constants) plus seeded Gaussian noise, and every file says so in its
header comment.

Run from the repository root (rewrites the files beside this script)::

    python examples/fit/make_synthetic.py            # seed 2024
    python examples/fit/make_synthetic.py --seed 7   # another noise realisation

Files:

- ``oxide-on-si-site.csv``: one site, 400-1000 nm every 2 nm, R in percent with a 1σ column;
  true oxide 1187.4 nm (a nominal 1.2 µm oxide run slightly thin).
- ``wafer-map.csv``: a long table of 213 sites on a 150 mm wafer (site, x_mm, y_mm,
  wavelength_nm, R as a fraction), 450-850 nm every 5 nm; the oxide is thicker at the centre
  than at the edge and tilted slightly in x (about 1.2 µm, a few percent non-uniform).
"""

from __future__ import annotations

import argparse
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
SINGLE_TRUTH_NM = 1187.4


def wafer_thickness_nm(x_mm, y_mm):
    """The invented oxide profile: a dome (thicker at the centre) and a slight tilt in x."""
    r = np.hypot(x_mm, y_mm) / 75.0
    return 1205.0 * (1.0 - 0.035 * r**2 + 0.006 * x_mm / 75.0)


def wafer_sites(pitch_mm: float = 8.5, radius_mm: float = 69.0):
    """A square grid of sites inside the wafer's edge exclusion, centre first."""
    n = int(radius_mm // pitch_mm)
    pts = [(i * pitch_mm, j * pitch_mm) for i in range(-n, n + 1) for j in range(-n, n + 1)
           if np.hypot(i * pitch_mm, j * pitch_mm) <= radius_mm]
    pts.sort(key=lambda p: (np.hypot(*p), np.arctan2(p[1], p[0])))
    return np.array(pts)


def main(argv=None) -> None:
    import filmstack as fs
    from filmstack.response import spectrum
    from filmstack.stack import AIR, Layer, Stack

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seed", type=int, default=2024, help="noise seed (default 2024)")
    args = ap.parse_args(argv)
    rng = np.random.default_rng(args.seed)
    si, ox = fs.get_material("Si"), fs.get_material("SiO2")
    stack = Stack(incident=AIR, substrate=si, layers=(Layer(ox, SINGLE_TRUTH_NM),))

    # One site, percent with uncertainties (the noise grows slightly towards the blue end).
    wl = np.arange(400.0, 1000.1, 2.0)
    R = spectrum(stack, wl, 0.0, "mean").R[0]
    sigma = 0.0025 + 0.0015 * (1000.0 - wl) / 600.0
    y = R + rng.normal(0.0, sigma)
    lines = [
        "# SYNTHETIC reflectance, not a measurement: made by examples/fit/make_synthetic.py",
        f"# (filmstack model, bundled SiO2 on Si, oxide {SINGLE_TRUTH_NM} nm, Gaussian noise, "
        f"seed {args.seed}).",
        "# Larkspur Optics - thermal oxide run LO-2291, wafer 07, centre site; reflectometer at "
        "normal incidence, unpolarised.",
        "# site: LO-2291-07-C",
        "# angle_deg: 0",
        "# polarization: mean",
        "wavelength_nm,R_percent,sigma_percent",
    ]
    lines += [f"{w:.1f},{100 * v:.3f},{100 * s:.3f}" for w, v, s in zip(wl, y, sigma)]
    (HERE / "oxide-on-si-site.csv").write_text("\n".join(lines) + "\n")

    # A wafer map: one batched call for every site's spectrum.
    sites = wafer_sites()
    d = wafer_thickness_nm(sites[:, 0], sites[:, 1])
    wl = np.arange(450.0, 850.1, 5.0)
    R = spectrum(stack, wl, 0.0, "mean", thicknesses_nm=d[:, None]).R[:, 0]      # (S, W)
    y = R + rng.normal(0.0, 0.003, R.shape)
    lines = [
        "# SYNTHETIC reflectance map, not a measurement: made by examples/fit/make_synthetic.py",
        f"# (filmstack model, bundled SiO2 on Si, invented dome-and-tilt oxide profile around "
        f"1.2 um, Gaussian noise 0.3 %, seed {args.seed}).",
        f"# Larkspur Optics - thermal oxide run LO-2291, wafer 07, {len(sites)} sites on a "
        "150 mm wafer; normal incidence, unpolarised.",
        "site,x_mm,y_mm,wavelength_nm,R",
    ]
    for k, ((x, yy), row) in enumerate(zip(sites, y)):
        sid = f"S{k + 1:03d}"
        lines += [f"{sid},{x:.1f},{yy:.1f},{w:.0f},{v:.5f}" for w, v in zip(wl, row)]
    (HERE / "wafer-map.csv").write_text("\n".join(lines) + "\n")
    print(f"wrote {HERE / 'oxide-on-si-site.csv'} and {HERE / 'wafer-map.csv'} "
          f"({len(sites)} sites)")


if __name__ == "__main__":
    main()
