"""Recipes for the invented sample tables: one module per table, each with NAME, FORMAT, ARGS, EXPECTED and build();
optional COMPANIONS maps a further file name to a builder called with its own seed and the built table."""
