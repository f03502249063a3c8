"""Where both apply, the thickness fitted from a spectrum agrees with the colour method's best
candidate (filmstack.colour.thickness).

Scenario: an oxide on a silicon wafer, seen by a colorimeter (D65, 2° observer, specular
reflection, CIELAB relative to the perfect diffuser; CIE 15:2018) and measured by a
reflectometer (400–900 nm). Both "observations" are synthetic, made with filmstack's model at a
known thickness and perturbed: the spectrum with Gaussian noise, the colour by 0.3 in a* and b*
(a typical colorimeter repeatability; a value from practice, no published source). The two
routes are independent methods on the same physics: a least-squares fit of R(λ) and a ΔE2000
search over a table of colours (Sharma, Wu & Dalal, Color Res. Appl. 30, 21 (2005)).
"""

from __future__ import annotations

import numpy as np
import pytest

import filmstack as fs
from filmstack.colour.stack_colour import ColourSetting
from filmstack.colour.thickness import FilmSystem, Observation, film_colour, find_thickness
from filmstack.fit import fit_spectrum, model_from_stack
from filmstack.io.measured import Channel, Measurement
from filmstack.response import spectrum
from filmstack.stack import AIR, FreeParameter, Layer, Stack

WL = np.arange(400.0, 900.1, 3.0)


@pytest.mark.parametrize("truth_nm", [150.0, 275.0, 420.0])
def test_spectrum_fit_agrees_with_the_best_colour_candidate(truth_nm):
    si, ox = fs.get_material("Si"), fs.get_material("SiO2")
    rng = np.random.default_rng(int(truth_nm))

    # the spectrum route
    stack = Stack(incident=AIR, substrate=si, layers=(Layer(ox, 500.0),),
                  free=(FreeParameter("layers[0].nm", 500.0, 20.0, 1000.0),))
    clean = spectrum(stack.with_thicknesses([truth_nm]), WL, 0.0, "mean").R[0]
    m = Measurement((Channel("R", 0.0, "mean", WL, clean + rng.normal(0, 0.003, WL.size)),))
    fitted = fit_spectrum(model_from_stack(stack), m)["layers[0].nm"]

    # the colour route
    system = FilmSystem(film=ox, substrate=si)
    lab = np.asarray(film_colour(system, truth_nm, ColourSetting()).Lab).ravel()[:3]
    lab = lab + np.array([0.0, 0.3, -0.3])
    colour = find_thickness(system, Observation(tuple(lab)), range_nm=(20.0, 1000.0))
    assert not colour.ambiguous
    best = colour.best.thickness_nm

    # Agreement: within 3σ of the spectral fit plus what a 0.4 ΔE colour error can move the
    # colour answer (a few nm here, where the colour changes fast with thickness).
    assert abs(fitted.value - best) < 3 * fitted.stderr + 3.0, (fitted.value, best)
    assert abs(fitted.value - truth_nm) < 4 * fitted.stderr
