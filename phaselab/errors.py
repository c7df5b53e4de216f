"""Exceptions raised by phaselab.

Every error a user can trigger with bad input derives from :class:`PhaselabError`, so a
notebook can catch them in one place, and each message names the offending piece.
"""


class PhaselabError(Exception):
    """Base class of every error phaselab raises on purpose."""


class ExpressionError(PhaselabError, ValueError):
    """A string expression was refused by the safe parser, or names unknown symbols."""


class ModelError(PhaselabError, ValueError):
    """A system cannot be built as asked (degenerate Lagrangian, bad coordinates, ...)."""


class ParameterError(PhaselabError, ValueError):
    """A parameter value or name is invalid (unknown name, non-finite value, ...)."""


class IntegrationError(PhaselabError, RuntimeError):
    """A numerical method cannot be applied or failed (non-converging implicit step, ...)."""


class StudyFileError(PhaselabError, ValueError):
    """A study file is malformed; the message names the file, the key and the problem."""
