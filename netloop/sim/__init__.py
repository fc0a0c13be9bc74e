"""sim stage."""
