"""reval: municipal assessment revaluation over an embedded DuckDB database (core library, no UI)."""
