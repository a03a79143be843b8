"""Work orders (group relamp, spot replacement): lifecycle, completion, exports, print page."""
