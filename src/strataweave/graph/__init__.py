"""graph layer (see DESIGN.md)."""
