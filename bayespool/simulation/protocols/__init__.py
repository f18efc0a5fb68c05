"""The registry of simulated testing protocols: scheme name -> "module:Class".

Classes are imported only when asked for, so a protocol with heavy dependencies costs nothing until it
is used. Adding a protocol is one line here. ``make_protocol(name, **options)`` passes a class only
the options its constructor accepts, so the command line can hand every protocol the same set
(``pool_size``, ``rows``, ``cols``, ``max_pool_size``, thresholds, ...) and a missing one is reported
by the class that needs it.
"""
from __future__ import annotations

import inspect
from importlib import import_module

from ...errors import InputError

PROTOCOLS = {
    "individual": "bayespool.simulation.protocols.individual:IndividualTesting",
    "dorfman": "bayespool.simulation.protocols.dorfman:DorfmanTesting",
    "array": "bayespool.simulation.protocols.array:ArrayTesting",
    "bayes": "bayespool.simulation.protocols.bayes:BayesianLoop",
    "pool-then-code": "bayespool.simulation.protocols.pool_then_code:PoolThenCode",
}


def protocol_class(name: str):
    """The Protocol subclass registered under ``name``."""
    if name not in PROTOCOLS:
        raise InputError(f"unknown scheme {name!r} (choose one of {', '.join(PROTOCOLS)})")
    module, _, attr = PROTOCOLS[name].partition(":")
    return getattr(import_module(module), attr)


def accepted_options(name: str) -> set | None:
    """Keyword options the named protocol's constructor takes (None: any)."""
    cls = protocol_class(name)
    try:
        params = inspect.signature(cls).parameters
    except ValueError:  # no introspectable constructor: it takes no options
        return set()
    if any(p.kind is inspect.Parameter.VAR_KEYWORD for p in params.values()):
        return None
    return set(params)


def make_protocol(name: str, **options):
    """An instance of the named protocol, built from the options its constructor takes."""
    cls = protocol_class(name)
    accepted = accepted_options(name)
    return cls(**{k: v for k, v in options.items()
                  if (accepted is None or k in accepted) and v is not None})
