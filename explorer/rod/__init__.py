"""Through-cell ("rod") electrochemical models: SPM, SPMe and DFN.

Build one by name from the shared parameter set::

    from explorer.rod import RodParameters, make_rod, Control
    params = RodParameters.from_cell(cell)
    rod = make_rod("spme", params)               # "spm" | "spme" | "dfn"
    state = rod.initial_state(soc=1.0, temperature_K=298.15)
    res = rod.solve_step(state, 10.0, 298.15, Control("current", 66.0))

The contract every model meets is in :mod:`explorer.rod.base`; the models in
:mod:`explorer.rod.spm`, :mod:`explorer.rod.spme`, :mod:`explorer.rod.dfn`;
the heat split in :mod:`explorer.rod.heat`; particle diffusion in
:mod:`explorer.rod.particle`.
"""

from explorer.rod.base import Control, RodModel, RodStepError, StepResult
from explorer.rod.dfn import DFN
from explorer.rod.heat import HEAT_KEYS
from explorer.rod.mesh import RodMesh
from explorer.rod.params import RodParameters
from explorer.rod.registry import MODELS, make_rod, shared_rod
from explorer.rod.spm import SPM
from explorer.rod.spme import SPMe

__all__ = ["Control", "RodModel", "RodStepError", "StepResult", "RodParameters", "RodMesh",
           "MODELS", "make_rod", "shared_rod", "SPM", "SPMe", "DFN", "HEAT_KEYS"]
