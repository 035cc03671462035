"""Edges: each module wraps exactly one outside thing (payloads, MQTT, SQLite, files, HTML)."""
