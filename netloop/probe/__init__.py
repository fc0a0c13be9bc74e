"""probe stage."""
