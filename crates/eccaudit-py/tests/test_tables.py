"""Tables from files of every format, astropy Tables, pandas DataFrames and arrays read to the
same numbers; bad input raises TableError with file, line and column; astropy reads eccaudit's
ECSV with units."""

import numpy as np
import pytest

import eccaudit
from conftest import CORVIN, TABLES, VELKA


def arrays(table):
    return (
        np.frombuffer(table.times_bytes(), "<f8"),
        np.frombuffer(table.velocities_bytes(), "<f8"),
        np.frombuffer(table.uncertainties_bytes(), "<f8"),
        table.instruments,
    )


def assert_same(a, b):
    for x, y in zip(arrays(a), arrays(b)):
        np.testing.assert_array_equal(x, y)


@pytest.mark.parametrize("name", ["velka17.ecsv", "velka17.vot"])
def test_astropy_files_read_like_the_csv(name):
    assert_same(eccaudit.read_table(TABLES / "astropy" / name), eccaudit.read_table(VELKA))


def test_astropy_table_with_quantities_and_time_reads_like_the_file():
    from astropy.table import Table

    # Read by astropy itself (reference library), handed over as an in-memory Table.
    t = Table.read(TABLES / "astropy" / "velka17.ecsv", format="ascii.ecsv")
    assert_same(eccaudit.table(t), eccaudit.read_table(VELKA))
    assert eccaudit.fit(t).to_dict() == eccaudit.fit(VELKA).to_dict()


def test_astropy_table_with_other_column_names_and_km_s():
    from astropy.table import Table

    t = Table.read(TABLES / "astropy" / "corvin4_kms.ecsv", format="ascii.ecsv")
    t.rename_columns(["bjd-2450000", "rv", "err"], ["when", "v", "dv"])
    picked = eccaudit.table(t, time="when", rv="v", err="dv", time_convention="BJD-2450000")
    assert_same(picked, eccaudit.read_table(CORVIN))


def test_dataframe_reads_like_the_file():
    import pandas

    frame = pandas.read_csv(VELKA, comment="#")
    assert_same(eccaudit.table(frame), eccaudit.read_table(VELKA))
    renamed = frame.rename(columns={"bjd": "t", "rv [m/s]": "v", "sigma [m/s]": "s"})
    picked = eccaudit.table(
        renamed, time="t", rv="v", err="s", instrument="instrument",
        velocity_unit="m/s", time_convention="BJD",
    )
    assert_same(picked, eccaudit.read_table(VELKA))


def test_arrays_and_quantities():
    import astropy.units as u
    from astropy.time import Time

    t, v, e, inst = arrays(eccaudit.read_table(CORVIN))
    a = eccaudit.table(time=t, rv=v / 1000, err=e / 1000, velocity_unit="km/s", time_convention="BJD-2450000")
    b = eccaudit.table(time=t, rv=v * u.m / u.s, err=(e * u.m / u.s).to(u.km / u.s), time_convention="BJD-2450000")
    np.testing.assert_allclose(arrays(a)[1], v, rtol=1e-15)
    np.testing.assert_allclose(arrays(b)[2], e, rtol=1e-15)
    when = Time(t + 2450000.0, format="jd", scale="tdb")
    c = eccaudit.table(time=when, rv=v, err=e)
    assert c.time_label == "BJD"
    np.testing.assert_array_equal(arrays(c)[0], t + 2450000.0)


@pytest.mark.parametrize(
    "name, line, column",
    [("bad_xml.vot", 22, 19), ("bad_yaml.ecsv", 7, 3), ("comma_decimal.vot", 23, 3), ("not_a_number.csv", None, None)],
)
def test_bad_files_raise_located_table_errors(name, line, column):
    path = TABLES / "malformed" / name
    with pytest.raises(eccaudit.TableError) as info:
        eccaudit.read_table(path)
    error = info.value
    assert isinstance(error, ValueError)
    assert error.file == str(path)
    assert str(error).startswith(f"{path}:{error.line}:{error.column}:")
    if line is not None:
        assert (error.line, error.column) == (line, column)


def test_bad_arrays_raise_located_table_errors():
    with pytest.raises(eccaudit.TableError, match=r"^arrays:2:3: uncertainty \(column 3\) must be greater than zero"):
        eccaudit.table(time=[1.0, 2.0, 3.0], rv=[1.0, 2.0, 3.0], err=[1.0, 0.0, 1.0], name="arrays")


def test_astropy_reads_the_table_ecsv_with_units(tmp_path):
    from astropy.table import Table

    path = tmp_path / "velka17.ecsv"
    path.write_text(eccaudit.read_table(VELKA).to_ecsv())
    t = Table.read(path, format="ascii.ecsv")
    assert str(t["rv"].unit) == "m / s" and str(t["uncertainty"].unit) == "m / s"
    assert t["time"].format == "jd" and t["time"].scale == "tdb"
    _, v, e, inst = arrays(eccaudit.read_table(VELKA))
    np.testing.assert_array_equal(t["rv"].value, v)
    np.testing.assert_array_equal(t["uncertainty"].value, e)
    assert list(t["instrument"]) == list(inst)


def test_astropy_reads_the_trials_ecsv_with_units(cli, tmp_path):
    from astropy.table import Table

    out = tmp_path / "grid"
    cli("inject", VELKA, "--e", "0,0.3", "--trials", "5", "--no-posterior", "--json", "--quiet", "--out", out)
    t = Table.read(out / "trials.ecsv", format="ascii.ecsv")
    assert str(t["true_k"].unit) == "m / s"
    assert str(t["true_omega"].unit) == "rad"
    py = eccaudit.inject(VELKA, e=[0, 0.3], trials=5, posterior=[], progress=False)
    for name in ["trial", "true_e", "true_k", "true_omega", "lsq_point", "lsq_upper95"]:
        np.testing.assert_array_equal(np.asarray(t[name]), py.trials[name])
    assert list(t["lsq_status"]) == list(py.trials["lsq_status"])
