"""Reporters: a check or a comparison in, text for people, CI annotations and review summaries out."""
