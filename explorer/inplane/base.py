"""The contract of a thermal model (lumped or 2-D in-plane).

The time stepper drives any thermal model through these members:

1. ``grid`` -- an :class:`explorer.inplane.grid.Grid` (a 1 x 1 grid for the
   lumped model).
2. ``heat_capacity_J_per_K`` -- the whole cell's (fin excluded).
3. ``initial_state(temperature_C)`` -- uniform state array.
4. ``step(state, heat_W, dt, tab_heat_W=None) -> (new_state, rejected_W)``:
   implicit step of ``dt`` seconds with ``heat_W`` the generated heat per grid
   cell (array of ``grid.shape``, W) and ``tab_heat_W`` a dict tab name -> W
   (tab Joule heat) held constant over the step; ``rejected_W`` maps each
   sink ("front", "back", "bottom", ..., tab names) to the mean heat flow
   into it over the step (W), so that stored + rejected = generated exactly
   (to round-off) for the discrete scheme.
5. ``temperature_C(state)`` -> array ``grid.shape`` (the cell sheet only);
   ``mean_temperature_C(state)``; ``stored_J(state)`` relative to 0 degC
   (fin included) for energy checks; ``core_surface_difference_K(heat_W)``
   -- the through-plane core-to-surface estimate per grid cell;
   ``core_temperature_C(state, heat_W)`` -- the hottest through-plane
   temperature per grid cell (the state holds through-thickness means);
   ``coolant_outlet_C(state)`` -- coolant leaving this cell, None without a
   coolant stream.

Optional:

6. ``fitted`` -- True when the model steps with a scheme fitted to its slowest
   mode (exponential fitting: that mode exact on any step). ``rejected_W`` of
   :meth:`step` is then the flow at the new state (what the record shows, at
   the recorded state), and the stepper takes the heat rejected over the step
   as generated less stored. A model stepping a fitted model for several cells
   (``model`` attribute) counts as fitted too.
7. ``recorded_figures(states, heat_W) -> dict`` defined on the class: the
   figures the stepper records (temperature field, core, faces, extremes,
   coolant outlet, stored heat) for many recorded states at once; the stepper
   then keeps each recorded state and asks once when the run ends, instead of
   calling the single-state members at every record. Only for models whose
   figures depend on the state alone (not on settings changed during a run).
8. ``factorises_per_step_size`` -- False for a model whose step costs the same
   whatever its size (the lumped cell): the stepper then takes the step sizes
   its error control asks for. Absent or True (the 2-D field, which caches one
   sparse factorisation per size): the sizes are kept to a ladder, so the
   factorisations are reused.
"""
