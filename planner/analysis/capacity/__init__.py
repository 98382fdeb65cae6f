"""What capacity is worth: shadow prices with their ranges, capacity options, capacity sweeps.

- :mod:`.parametric` — the fixed-slate QP as a parametric QP in one capacity
  direction (volumes and duals affine on each active set; events where it ends).
- :mod:`.warm` — the mixed-integer plan re-solved at other capacities with the
  tangent cuts carried over (cuts do not depend on capacity).
- :mod:`.ranging` — each resource's shadow price, its rate of change and the
  capacity range over which the binding limits and the slate hold.
- :mod:`.options` — each capacity option valued on its own by re-solving, and
  the best set chosen jointly.
- :mod:`.sweep` — optimal profit along one resource's capacity, with the exact
  points where the slate or the bottleneck changes.
"""
