"""Simulation of whole testing protocols on invented cohorts, for operating characteristics."""
