"""netsim.hardware (see DEVELOPERS.md for this layer's contract)."""
