"""factorize layer (see DESIGN.md)."""
