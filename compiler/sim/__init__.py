"""Simulation: an independent replay of the TAP and registers, and the virtual board."""
