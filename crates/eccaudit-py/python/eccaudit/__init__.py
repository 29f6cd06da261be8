"""eccaudit for Python and notebooks: audit an orbital eccentricity before you quote it.

Every number comes from eccaudit's Rust core (the same code as the ``eccaudit`` command line and
the page), so a seed gives the command line's numbers::

    import eccaudit
    table = eccaudit.read_table("demo-data/velka17-nearly-circular.csv")   # CSV, ECSV, VOTable
    fit = eccaudit.fit(table)                      # least squares
    post = eccaudit.priors(table, steps=2000)      # posterior of e under six priors
    result = eccaudit.audit(table, injection={"trials_per_cell": 100})
    result                                         # the statement, rendered in a notebook
    result.to_dict()                               # the same content as `eccaudit audit --json`

Data can be a path, an :class:`eccaudit.Table`, an astropy ``Table``, a pandas ``DataFrame``,
or arrays given as ``time=``, ``rv=``, ``err=`` (and ``instrument=``).
"""

from ._core import TableError, Table, __version__
from ._api import audit, default_audit_settings, fit, inject, priors, read_table, table
from ._results import AuditResult, FitResult, InjectResult, PriorsResult

__all__ = [
    "AuditResult",
    "FitResult",
    "InjectResult",
    "PriorsResult",
    "Table",
    "TableError",
    "__version__",
    "audit",
    "default_audit_settings",
    "fit",
    "inject",
    "priors",
    "read_table",
    "table",
]
