"""The project's data: config, database, import, sales qualification and the market trend."""
