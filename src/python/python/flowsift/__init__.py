"""flowsift in Python: peculiar velocities of in-memory catalogues.

The functions call the flowsift library (the code the command line runs): options are the
command line's flags with underscores (``--z-column`` is ``z_column``), checked by the same
parser, so a bad value raises ``ValueError`` with the command line's message and an unknown
name raises ``TypeError``.

>>> import pyarrow as pa, flowsift
>>> out = flowsift.velocities(pa.table({...}), z_column="cz", z_unit="cz")  # doctest: +SKIP
"""

import json

import numpy as np
import pyarrow as pa

from . import _flowsift

__all__ = ["velocities", "galaxy", "distances", "option_names", "__version__"]
__version__ = _flowsift.__version__


class _Stream:
    """An Arrow C stream capsule offered through the PyCapsule protocol."""

    def __init__(self, capsule):
        self._capsule = capsule

    def __arrow_c_stream__(self, requested_schema=None):
        capsule, self._capsule = self._capsule, None
        if capsule is None:
            raise ValueError("this stream has been read already")
        return capsule


def velocities(table, *, row_offset=0, threads=None, **options):
    """Derive peculiar velocities for every row of ``table``, as ``flowsift velocities``.

    ``table`` is anything offering the Arrow C stream interface (``__arrow_c_stream__``): a
    ``pyarrow.Table``, a pandas (>= 2.2) or polars DataFrame. ``options`` are the flags of
    ``flowsift velocities`` with underscores, or ``config="run.toml"``. ``row_offset`` is
    the index, in the whole catalogue, of the table's first row: Monte Carlo draws are
    seeded per row of the whole catalogue, so a piece gives the draws the whole would.
    ``threads`` limits the threads of the call (default: all cores).

    Returns a ``pyarrow.Table``: the columns, values and ``status`` the command line writes,
    with the run's provenance in the schema metadata (keys ``flowsift.<entry>``).
    Groups, the bulk flow and the export (outputs of their own) are refused.
    """
    if isinstance(row_offset, bool) or not isinstance(row_offset, int) or row_offset < 0:
        raise ValueError(f"flowsift.velocities(): row_offset must be a non-negative integer, got {row_offset!r}")
    if threads is not None and (isinstance(threads, bool) or not isinstance(threads, int) or threads < 1):
        raise ValueError(f"flowsift.velocities(): threads must be a positive integer, got {threads!r}")
    capsule = _flowsift.velocities(table, options, row_offset, threads)
    return pa.table(_Stream(capsule))


def galaxy(**options):
    """One object, as ``flowsift galaxy --json``: a dict.

    ``options`` are the flags of ``flowsift galaxy`` with underscores, e.g.
    ``galaxy(ra=150.1, dec=2.2, z_helio=0.0231, mu=34.85, mu_err=0.4)``.
    """
    return json.loads(_flowsift.galaxy(options))


def distances(z, **options):
    """FLRW distances at the redshifts ``z``, as ``flowsift distances --json``.

    Returns a dict of numpy arrays: ``z``, ``d_c``, ``d_m``, ``d_l``, ``d_a`` (Mpc, or
    h⁻¹ Mpc with ``length_unit="mpc-over-h"``) and ``mu`` (mag).
    """
    zs = np.atleast_1d(np.asarray(z, dtype=float)).ravel().tolist()
    rows = json.loads(_flowsift.distances(zs, options))
    keys = ["z", "d_c", "d_m", "d_l", "d_a", "mu"]
    return {k: np.array([r[k] for r in rows], dtype=float) for k in keys}


def option_names(function="velocities"):
    """The keyword options ``function`` (velocities, galaxy or distances) accepts."""
    return list(_flowsift.option_names(function))
