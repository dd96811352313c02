"""netsim.network (see DEVELOPERS.md for this layer's contract)."""
