"""Pure analyses over tidy DataFrames; each returns a small frozen result."""
