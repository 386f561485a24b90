"""Case input: the case schema, reading and checking case and network files."""
