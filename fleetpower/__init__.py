"""fleetpower."""
