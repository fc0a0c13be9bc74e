"""graph stage."""
