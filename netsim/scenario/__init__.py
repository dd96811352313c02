"""netsim.scenario (see DEVELOPERS.md for this layer's contract)."""
