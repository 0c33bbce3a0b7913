"""report layer (see DESIGN.md)."""
