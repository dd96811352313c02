"""netsim.engine (see DEVELOPERS.md for this layer's contract)."""
