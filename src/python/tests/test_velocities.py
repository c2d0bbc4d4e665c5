"""flowsift.velocities against the command line (the reference: `flowsift velocities` on the
same rows, read back from its Parquet output), on pyarrow, pandas and polars inputs."""

import json

import pyarrow as pa
import pytest

import flowsift
from conftest import assert_same_columns, cli_velocities


def test_equals_the_command_line_on_the_demo_survey(cli, survey, tmp_path):
    path, table = survey
    expected = cli_velocities(cli, path, tmp_path / "cli.parquet")
    got = flowsift.velocities(table)
    assert_same_columns(expected, got)


def test_options_are_the_command_line_flags(cli, survey, tmp_path):
    path, table = survey
    flags = ["--preset", "planck2018", "--dl-convention", "cosmological", "--sigma-star", "250",
             "--monte-carlo", "50", "--seed", "3", "--watkins-feldman"]
    expected = cli_velocities(cli, path, tmp_path / "cli.parquet", *flags)
    got = flowsift.velocities(table, preset="planck2018", dl_convention="cosmological",
                              sigma_star=250, monte_carlo=50, seed=3, watkins_feldman=True)
    assert_same_columns(expected, got)


def test_provenance_is_in_the_schema_metadata(cli, survey, tmp_path):
    path, table = survey
    expected = cli_velocities(cli, path, tmp_path / "cli.parquet", "--h0", "73")
    got = flowsift.velocities(table, h0=73)
    meta = {k.decode(): v.decode() for k, v in got.schema.metadata.items()}
    cli_meta = {k.decode(): v.decode() for k, v in expected.schema.metadata.items()}
    assert set(k for k in cli_meta if k.startswith("flowsift.")) == set(
        k for k in meta if k.startswith("flowsift."))
    record = json.loads(meta["flowsift.record"])
    cli_record = json.loads(cli_meta["flowsift.record"])
    assert record["settings"] == {**cli_record["settings"], "input": record["settings"]["input"]}
    assert record["settings"]["cosmology"]["h0"] == 73
    # Units travel as field metadata, as in the Parquet output.
    assert got.schema.field("v_pec").metadata[b"unit"] == expected.schema.field("v_pec").metadata[b"unit"]


def test_a_result_fed_back_inherits_its_record(survey):
    _, table = survey
    first = flowsift.velocities(table, h0=73)
    again = flowsift.velocities(first)
    assert again.column("v_pec").equals(first.column("v_pec"))
    with pytest.raises(ValueError, match="(?i)record|override"):
        flowsift.velocities(first, h0=60)


def test_pandas_and_polars_inputs_give_the_same_result(survey):
    pl = pytest.importorskip("polars")
    _, table = survey
    reference = flowsift.velocities(table)
    from_pandas = flowsift.velocities(table.to_pandas())
    from_polars = flowsift.velocities(pl.from_arrow(table))
    assert_same_columns(reference, from_pandas)
    assert_same_columns(reference, from_polars)


def test_row_offset_gives_a_piece_the_draws_of_the_whole(survey):
    _, table = survey
    whole = flowsift.velocities(table, monte_carlo=40, seed=11)
    piece = flowsift.velocities(table.slice(1000, 500), monte_carlo=40, seed=11, row_offset=1000)
    assert_same_columns(whole.slice(1000, 500), piece)
    unshifted = flowsift.velocities(table.slice(1000, 500), monte_carlo=40, seed=11)
    assert not unshifted.column("v_pec_mc_median").equals(piece.column("v_pec_mc_median"))


def test_threads_change_no_value(survey):
    _, table = survey
    one = flowsift.velocities(table, monte_carlo=20, seed=5, threads=1)
    many = flowsift.velocities(table, monte_carlo=20, seed=5, threads=2)
    assert_same_columns(one, many)


def test_unknown_options_raise_type_error_naming_them(survey):
    _, table = survey
    with pytest.raises(TypeError, match="'z_colum'.*'zz'|'zz'.*'z_colum'"):
        flowsift.velocities(table, z_colum="cz", zz=1)


@pytest.mark.parametrize(
    "options, message",
    [
        ({"distance_kind": "parsecs"}, "invalid value 'parsecs'"),
        ({"h0": "fast"}, "invalid value 'fast'"),
        ({"monte_carlo": 1}, "at least 2 draws"),
        ({"z_column": "no_such_column"}, "no_such_column"),
        ({"watkins_feldman": "yes"}, "switch"),
        ({"bulk_flow": True}, "bulk flow"),
    ],
)
def test_bad_values_raise_value_error_with_the_command_line_message(survey, options, message):
    _, table = survey
    with pytest.raises(ValueError, match=message):
        flowsift.velocities(table, **options)


def test_the_command_line_says_the_same(cli, flowsift_bin, survey, tmp_path):
    import subprocess
    path, _ = survey
    done = subprocess.run([flowsift_bin, "velocities", str(path), "-o", str(tmp_path / "x.parquet"),
                           "--distance-kind", "parsecs"], capture_output=True, text=True)
    assert done.returncode != 0 and "invalid value 'parsecs'" in done.stderr


def test_not_a_table_is_a_type_error():
    with pytest.raises(TypeError, match="Arrow C stream"):
        flowsift.velocities([1, 2, 3])
