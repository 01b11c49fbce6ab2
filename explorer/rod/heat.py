"""The Bernardi heat split returned by every rod model.

Bernardi, Pawlikowski & Newman, "A general energy balance for battery
systems", J. Electrochem. Soc. 132 (1985) 5, give the cell's heat generation
as ``I (U - V) - I T dU/dT`` (current positive on discharge). Written locally
for a porous-electrode model (the form the DFN literature uses, e.g. Rao &
Newman, J. Electrochem. Soc. 144 (1997) 2697) it splits into

* ``irreversible`` -- reaction overpotential, sum over electrodes of
  ``A * integral(a j eta dx)``;
* ``reversible`` -- entropic, ``A * integral(a j T dU/dT dx)``; with ``j``
  positive for oxidation this is ``I T (dU_n/dT - dU_p/dT)`` for uniform
  reaction, which changes sign with the current;
* ``ohmic_electrolyte`` -- ``A * integral(-i_e . grad phi_e dx)``: Joule heat
  of the ionic current including the diffusion-potential part;
* ``ohmic_solid`` -- ``A * integral(i_s^2 / sigma_eff dx)``.

Summing the discrete terms of a model by parts gives
``irreversible + ohmic_electrolyte + ohmic_solid = I (U_r - V_rod)`` where
``U_r = -(A / I) sum(a j U dx)`` is the reaction-weighted open-circuit voltage
at the particle surfaces. For the SPM and SPMe the reaction is uniform, so
``U_r`` is exactly the surface OCV the models report (``ocv_V``) and the
identity holds to round-off; for the DFN ``ocv_V`` is taken at the
electrode-averaged surface stoichiometries and the identity holds to the
(small) non-uniformity of the reaction. Heat of mixing inside the particles
and in the electrolyte is neglected, as in Bernardi et al.'s simplified form.
"""

from __future__ import annotations

__all__ = ["HEAT_KEYS", "heat_split"]

HEAT_KEYS = ("irreversible", "reversible", "ohmic_electrolyte", "ohmic_solid")


def heat_split(irreversible: float, reversible: float, ohmic_electrolyte: float,
               ohmic_solid: float) -> dict[str, float]:
    """The whole cell's heat rates in W under the keys of :data:`HEAT_KEYS`."""
    return {"irreversible": float(irreversible), "reversible": float(reversible),
            "ohmic_electrolyte": float(ohmic_electrolyte), "ohmic_solid": float(ohmic_solid)}
