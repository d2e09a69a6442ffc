"""The app's screens, each with its own .tcss file."""
