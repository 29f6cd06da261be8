"""Type stubs of the compiled module eccaudit._core (PyO3)."""

from os import PathLike
from typing import Any, Callable, List, Optional, Tuple, Union

__version__: str

class TableError(ValueError):
    """A table that cannot be read; the message names the file, line and column."""

    file: Optional[str]
    line: Optional[int]
    column: Optional[int]

class Table:
    """A checked velocity table: times [d] in its convention, velocities and uncertainties [m/s]."""

    @property
    def source_name(self) -> str: ...
    @property
    def n_rows(self) -> int: ...
    @property
    def instruments(self) -> List[str]: ...
    @property
    def instrument_names(self) -> List[str]: ...
    @property
    def time_label(self) -> str: ...
    @property
    def notices(self) -> List[str]: ...
    def times_bytes(self) -> bytes: ...
    def velocities_bytes(self) -> bytes: ...
    def uncertainties_bytes(self) -> bytes: ...
    def summary_json(self) -> str: ...
    def to_ecsv(self) -> str: ...

Progress = Optional[Callable[[int, int], Any]]
TrialRows = Tuple[List[str], List[List[str]]]
ChainData = Tuple[List[str], Tuple[int, int, int], bytes, bytes]

def read_table(
    path: Union[str, PathLike[str]],
    velocity_unit: Optional[str] = None,
    time: Optional[str] = None,
    delimiter: Optional[str] = None,
) -> Table: ...
def parse_text(
    text: str,
    source_name: str,
    velocity_unit: Optional[str] = None,
    time: Optional[str] = None,
    delimiter: Optional[str] = None,
) -> Table: ...
def table_from_columns(
    source_name: str,
    times: List[float],
    velocities: List[float],
    uncertainties: List[float],
    instruments: List[str],
    time: Optional[str] = None,
) -> Table: ...
def fit(table: Table, options_json: str) -> Tuple[str, str]: ...
def priors(
    table: Table, request_json: str, threads: Optional[int] = None, progress: Progress = None
) -> Tuple[str, List[ChainData], str]: ...
def inject(
    table: Table, settings_json: str, threads: Optional[int] = None, progress: Progress = None
) -> Tuple[str, TrialRows, str]: ...
def audit(
    table: Table, settings_json: str, threads: Optional[int] = None, progress: Progress = None
) -> Tuple[str, str, TrialRows, str, str]: ...
def default_audit_settings() -> str: ...
