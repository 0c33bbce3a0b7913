"""data layer (see DESIGN.md)."""
