"""The `compose` command. Nothing in the core imports this package."""
