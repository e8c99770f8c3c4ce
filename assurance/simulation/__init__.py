"""Trials simulated patient by patient, to check the closed forms where they approximate.

- :mod:`~assurance.simulation.survival`: time-to-event trials with a log-rank test.
"""
