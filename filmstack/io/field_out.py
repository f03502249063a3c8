"""The electric-field profile as CSV and JSON (``filmstack field``).

Units: depth in nm from the outer surface (negative in the incident medium); |E|² relative to
the incident wave's |E|², a plain ratio. Layers are numbered from 1 at the substrate, as in
the layer tables of the other commands.
"""

from __future__ import annotations

import numpy as np

__all__ = ["layer_peaks", "field_csv", "field_json"]


def layer_peaks(profile, stack) -> list[dict]:
    """Per front layer, outer surface first: number, material, nm, peak |E|² and its depth, and
    |E|² at the layer's outer interface.

    ``profile`` is a :class:`filmstack.response.FieldProfile` of ``stack``.
    """
    depth = np.asarray(profile.depth_nm)
    e2 = np.asarray(profile.e2)
    where = np.asarray(profile.layer_index)
    out = []
    for j in range(len(stack.layers) - 1, -1, -1):
        inside = np.flatnonzero(where == j)
        layer = stack.layers[j]
        if inside.size == 0:          # a layer thinner than the sampling step
            continue
        k = inside[np.argmax(e2[inside])]
        out.append({"layer": j + 1, "material": layer.material.name,
                    "nm": float(layer.thickness_nm), "peak_e2": float(e2[k]),
                    "peak_depth_nm": float(depth[k]), "outer_interface_e2": float(e2[inside[0]])})
    return out


def field_json(profile, stack) -> dict:
    """The JSON result of ``filmstack field``."""
    return {"wavelength_nm": profile.wavelength_nm, "angle_deg": profile.angle_deg,
            "polarization": profile.polarization,
            "depth_nm": np.asarray(profile.depth_nm).tolist(),
            "e2": np.asarray(profile.e2).tolist(),
            "interfaces_nm": np.asarray(profile.interfaces_nm).tolist(),
            "layers": layer_peaks(profile, stack)}


def field_csv(profile) -> str:
    """CSV with units in the header: depth_nm, layer (1 = next to the substrate, 0 the
    incident medium, L+1 the substrate), E2_relative."""
    L = int(np.max(profile.layer_index))            # the substrate's index is L
    lines = [f"# electric field |E|^2 relative to the incident wave, {profile.wavelength_nm:g} nm, "
             f"{profile.angle_deg:g} deg, {profile.polarization}; depth from the outer surface",
             "depth_nm,layer,E2_relative"]
    for z, j, v in zip(profile.depth_nm, profile.layer_index, profile.e2):
        number = 0 if j < 0 else (L + 1 if j == L else j + 1)
        lines.append(f"{z:.6g},{number},{v:.9g}")
    return "\n".join(lines) + "\n"
