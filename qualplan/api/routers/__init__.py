"""Routers of the HTTP API: parse into planning commands, call one use case, return schemas."""
