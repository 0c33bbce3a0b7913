"""evaluate layer (see DESIGN.md)."""
