"""Recipes for the invented sample tables: one module per table, each with NAME, FORMAT, ARGS, EXPECTED and build()."""
