"""Reporters: a check or a comparison in, text for people, CI annotations and review summaries out.

``text`` writes a check as text, JSON and JUnit; ``html`` the self-contained visual report;
``batch``, ``sarif``, ``markdown`` and ``diff`` the outputs of a merge review.
"""
