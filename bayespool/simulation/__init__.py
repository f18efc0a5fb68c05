"""Simulation of whole testing protocols on invented cohorts, for operating characteristics.

:func:`simulate` plays a registered protocol (``individual``, ``dorfman``, ``array``; see
:mod:`bayespool.simulation.protocols`) on cohorts drawn from a prevalence or per-specimen priors, with
readouts drawn from the assay model (dilution included), and returns a :class:`Simulation` with
operating characteristics and their Monte Carlo standard errors. :func:`sweep` runs a grid of
prevalences and pool sizes.
"""
from .characteristics import OperatingCharacteristics, summarise_runs
from .cohort import Cohort, make_cohort
from .protocol import Outcome, Protocol, Tester
from .protocols import PROTOCOLS, make_protocol, protocol_class
from .simulator import Simulation, Sweep, simulate, sweep

__all__ = ["Cohort", "make_cohort", "Outcome", "Protocol", "Tester", "PROTOCOLS", "make_protocol",
           "protocol_class", "OperatingCharacteristics", "summarise_runs", "Simulation", "Sweep",
           "simulate", "sweep"]
