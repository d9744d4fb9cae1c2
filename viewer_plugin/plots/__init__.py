"""matplotlib figure builders shared by the dock widgets and the command line (no Qt, no pyplot)."""
