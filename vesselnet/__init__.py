"""vesselnet: pressure and flow in branching blood-vessel networks."""
