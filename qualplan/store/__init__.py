"""Persistence: models, sessions, repositories, migrations (the only layer writing SQL)."""
