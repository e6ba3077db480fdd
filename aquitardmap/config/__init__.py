"""Project settings (``project.toml``) and the materials table."""
