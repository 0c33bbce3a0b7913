"""workflow layer (see DESIGN.md)."""
