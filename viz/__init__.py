"""viz: the plotly view layer of vesselnet (imported only by the command line)."""
