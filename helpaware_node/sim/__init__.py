"""Simulated sites: scenario files, a world of people, and every policy run through core.decide."""
