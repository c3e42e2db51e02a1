"""Doors for other tools: the job document, its runner, the local service."""
