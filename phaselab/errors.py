"""Exceptions raised by phaselab, and the rule for which one to raise.

Every error a user can trigger derives from :class:`PhaselabError`, so a notebook can catch
them in one place, and each message names the offending piece and, where there is one, the
way out.

The rule
--------
- :class:`ParameterError`: an argument of a call is bad (wrong type, shape, sign or range; an
  unknown parameter or state name; a request larger than a stated limit). The caller can
  fix it by passing something else.
- :class:`ExpressionError`: a string expression was refused by the safe parser (a special
  case of a bad argument, kept apart because it carries the offending piece of text).
- :class:`ModelError`: the system cannot do what is asked (a degenerate Lagrangian, a map
  that is not area-preserving, a section plane for a driven system, a function that cannot
  be compiled). The caller must change the model or ask for something else.
- :class:`IntegrationError`: a failure while computing (an implicit step that does not
  converge, Newton's method that does not converge, a step found far too large by the
  probe). The inputs were acceptable; the numerics failed on them.
- :class:`StudyFileError`: anything wrong with a study file, as ``file: key: problem``.
- :class:`DataFileError`: a data file or store that phaselab reads back (a section's CSV or
  NetCDF file, a scan's resumable Zarr store) is not what phaselab writes: damaged,
  truncated, edited, or crafted with types, ranges, units or sizes phaselab never writes.
  The message names the file and what is wrong with it. A damaged part that phaselab can
  recompute (a chunk of a scan store) is recomputed with a warning instead.
- :class:`MissingExtraError`: an optional dependency is not installed (xarray, netCDF4, zarr,
  the notebook packages); the message names the pip extra that brings it. It is also an
  :class:`ImportError`.
- :class:`PhaselabWarning` (a warning, not an error): a result was computed but may not be what
  was meant (a periodic orbit found far from its guess). Filter it like any Python warning.

Never raise the bare :class:`PhaselabError`: ``tests/test_errors.py`` reads every module and
fails on it.

Failures that concern one orbit of a batch are not raised at all: the orbit is flagged in the
result's ``status`` (see :mod:`phaselab.engine.status`) and the rest of the batch is returned.
"""


class PhaselabError(Exception):
    """Base class of every error phaselab raises on purpose."""


class ParameterError(PhaselabError, ValueError):
    """An argument is invalid (type, shape, range, unknown name, over a limit)."""


class ExpressionError(ParameterError):
    """A string expression was refused by the safe parser, or names unknown symbols."""


class ModelError(PhaselabError, ValueError):
    """The system cannot do what is asked (degenerate Lagrangian, bad coordinates, ...)."""


class IntegrationError(PhaselabError, RuntimeError):
    """The numerics failed on acceptable inputs (non-converging implicit step, Newton, ...)."""


class StudyFileError(PhaselabError, ValueError):
    """A study file is malformed; the message names the file, the key and the problem."""


class DataFileError(PhaselabError, ValueError):
    """A data file or store read back is damaged or is not what phaselab writes."""


class MissingExtraError(PhaselabError, ImportError):
    """An optional dependency is missing; the message names the extra to install."""


class PhaselabWarning(UserWarning):
    """A result was computed but may not be what was meant (e.g. a periodic orbit found far
    from its guess). Filter with ``warnings.simplefilter("error", PhaselabWarning)``."""
