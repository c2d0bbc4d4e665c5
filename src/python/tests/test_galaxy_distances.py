"""flowsift.galaxy and flowsift.distances against `flowsift galaxy --json` and
`flowsift distances --json` (the reference: the command line's JSON)."""

import json

import numpy as np
import pytest

import flowsift


def test_galaxy_is_the_command_line_json(cli):
    expected = json.loads(cli("galaxy", "--ra", "150.1", "--dec", "2.2", "--z-helio", "0.0231",
                              "--mu", "34.85", "--mu-err", "0.4", "--h0", "72", "--json"))
    got = flowsift.galaxy(ra=150.1, dec=2.2, z_helio=0.0231, mu=34.85, mu_err=0.4, h0=72)
    assert got == expected


def test_galaxy_needs_one_distance():
    with pytest.raises(ValueError, match="mu"):
        flowsift.galaxy(ra=150.1, dec=2.2, z_helio=0.0231)


def test_distances_are_the_command_line_json(cli):
    expected = json.loads(cli("distances", "--z", "0.01,0.1,1", "--omega-m", "0.31", "--json"))
    got = flowsift.distances([0.01, 0.1, 1.0], omega_m=0.31)
    for key in ["z", "d_c", "d_m", "d_l", "d_a", "mu"]:
        np.testing.assert_array_equal(got[key], [row[key] for row in expected], err_msg=key)


def test_distances_refuse_a_negative_redshift():
    with pytest.raises(ValueError, match="negative redshift"):
        flowsift.distances([-0.5])


def test_unknown_distance_option_is_a_type_error():
    with pytest.raises(TypeError, match="'omega'"):
        flowsift.distances([0.1], omega=0.3)
