"""HTTP API (FastAPI) under /api/v1."""
