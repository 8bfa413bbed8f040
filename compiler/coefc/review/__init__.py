"""Merge review: many descriptions checked at once, base against head, and where in a file a finding belongs."""
