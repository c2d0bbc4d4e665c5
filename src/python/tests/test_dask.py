"""flowsift.dask.velocities on a two-process LocalCluster over a 10-partition Parquet dataset
against `flowsift velocities … --monte-carlo 200 --seed 7` on the whole file (the
reference: the command line on the concatenated catalogue)."""

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

import flowsift
import flowsift.dask
from conftest import assert_same_columns, cli_velocities

dd = pytest.importorskip("dask.dataframe")
distributed = pytest.importorskip("dask.distributed")


@pytest.fixture(scope="module")
def cluster_client():
    with distributed.LocalCluster(n_workers=2, processes=True, threads_per_worker=1,
                                  dashboard_address=None) as cluster:
        with distributed.Client(cluster) as client:
            yield client


def test_ten_partitions_equal_the_whole_file(cli, survey, tmp_path, cluster_client):
    path, table = survey
    dataset = tmp_path / "dataset"
    dd.from_pandas(table.to_pandas(), npartitions=10).to_parquet(dataset, write_index=False)
    expected = cli_velocities(cli, path, tmp_path / "cli.parquet", "--monte-carlo", "200",
                              "--seed", "7")
    assert len(list(dataset.glob("*.parquet"))) == 10
    ddf = dd.read_parquet(dataset)
    got = flowsift.dask.velocities(ddf, monte_carlo=200, seed=7).compute()
    got = pa.Table.from_pandas(got.reset_index(drop=True), preserve_index=False)
    assert_same_columns(expected.select(got.column_names), got)
    assert got.column_names == expected.column_names


def test_uneven_partitions_give_the_same_draws(survey):
    """Seven partitions on the synchronous scheduler against flowsift.velocities on the
    whole table (itself checked against the command line above)."""
    _, table = survey
    reference = flowsift.velocities(table, monte_carlo=30, seed=4)
    ddf = dd.from_pandas(table.to_pandas(), npartitions=7)
    got = flowsift.dask.velocities(ddf, monte_carlo=30, seed=4).compute(scheduler="sync")
    got = pa.Table.from_pandas(got.reset_index(drop=True), preserve_index=False)
    assert_same_columns(reference, got)


@pytest.mark.parametrize("option", [{"outliers": True}, {"bulk_flow": True}, {"groups": True},
                                    {"export": "flow.csv"}, {"neighbours": 5}])
def test_whole_sample_stages_are_refused(survey, option):
    _, table = survey
    ddf = dd.from_pandas(table.to_pandas(), npartitions=2)
    with pytest.raises(ValueError, match="whole sample"):
        flowsift.dask.velocities(ddf, **option)
