"""The roomconv terminal workbench (Textual)."""
