"""The pandas fronts: tables in, tables out; options checked once."""
