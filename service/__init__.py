"""uvdose HTTP edge: app factory, blueprints, schemas and the grid-cell cache."""
