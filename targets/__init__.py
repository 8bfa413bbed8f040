"""Built-in targets: one folder per target, each with a target.toml (shipped as package data)."""
