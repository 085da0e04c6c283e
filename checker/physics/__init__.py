"""Numbers from geometry: field solutions and closed forms, each with its source in the docstring."""
