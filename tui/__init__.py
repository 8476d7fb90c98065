"""railrig's terminal dashboard: a client of the rig's monitor endpoint only."""
