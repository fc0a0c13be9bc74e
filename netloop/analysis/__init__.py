"""analysis stage."""
