"""Reporters of a check: a :class:`coefc.budget.CheckReport` in, text out.

``text`` writes the text, JSON and JUnit forms; ``html`` the self-contained visual report.
"""
