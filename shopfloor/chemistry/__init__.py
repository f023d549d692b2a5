"""Baths behind the wet steps: tanks, analysis plans, analyses, additions and exposed lots."""
