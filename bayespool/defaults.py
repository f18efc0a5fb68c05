"""Defaults shared by the library and the command line (kept import-light for fast start-up)."""

NEGATIVE_BELOW = 0.01   # call negative when P(positive) < this
POSITIVE_ABOVE = 0.99   # call positive when P(positive) > this
PREVALENCE = 0.01       # prior for samples without one
METHODS = ("auto", "exact")
