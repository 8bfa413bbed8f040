"""Quantisation analysis of a realised channel (issue 4)."""
