"""faultfind: expected readings, part estimates and fault hypotheses for a circuit under test."""

__version__ = "0.1.0"
