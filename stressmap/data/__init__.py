"""Package data: physics defaults (defaults.toml) and the fictional demo scenario."""
