"""HTTP routes (thin: validate, call the core, map the result)."""
