"""The single-shaft gas turbine unit type: schema, input checks, reconstruction, forward model."""
