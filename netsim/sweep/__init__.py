"""netsim.sweep (see DEVELOPERS.md for this layer's contract)."""
