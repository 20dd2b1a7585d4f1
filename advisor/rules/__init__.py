"""Rules: the condition language and the YAML rule sets written in it."""
