"""Configuration: spherometer profiles (TOML) and the shipped examples in `profiles/`."""
