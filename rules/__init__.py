"""Built-in rules, one module per family; each module's ``RULES`` is registered through the
``prefit.rules`` entry-point group exactly as a third-party plugin would be."""
