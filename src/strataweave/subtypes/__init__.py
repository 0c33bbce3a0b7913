"""subtypes layer (see DESIGN.md)."""
