"""netsim.qinfo (see DEVELOPERS.md for this layer's contract)."""
