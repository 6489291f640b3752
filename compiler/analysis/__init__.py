"""Analyses around the core: pre-hardware checks, fault grading, generation, diagnosis."""
