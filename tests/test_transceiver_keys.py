"""The transceiver's receive-power minimum: its key, the earlier key still accepted, not both.

IEEE 802.3 clause 52 gives the 10GBASE-SR receive minimum, −9.9 dBm, as "average receive
power, min (informative)" (verified, secondary), not as the receiver sensitivity (which the
clause states in OMA); the key is named for what it is: rx_min_average_dbm.
"""
from __future__ import annotations

import pytest

from reportgen.errors import InputError
from reportgen.inputs.project import load_project
from tests.conftest import MINIMAL_PROJECT

Y = MINIMAL_PROJECT["project.yaml"]
OLD = "rx_sensitivity_dbm: -9.9"
assert OLD in Y


def _problems(make_project, yaml_text: str) -> list[str]:
    with pytest.raises(InputError) as caught:
        load_project(make_project({"project.yaml": yaml_text}))
    return [str(problem) for problem in caught.value.problems]


@pytest.mark.parametrize("written", ["rx_min_average_dbm: -9.9", OLD], ids=["key", "earlier key"])
def test_receive_minimum_is_read_under_either_key(make_project, written):
    project = load_project(make_project({"project.yaml": Y.replace(OLD, written)}))
    sr = project.transceivers["sr"]
    # IEEE 802.3 cl. 52, 10GBASE-SR: average receive power min −9.9 dBm, max −1.0 dBm
    assert (sr.rx_min_average_dbm, sr.rx_overload_dbm) == (-9.9, -1.0)


def test_both_keys_at_once_are_refused(make_project):
    both = Y.replace(OLD, "rx_min_average_dbm: -9.9, rx_sensitivity_dbm: -9.9")
    assert _problems(make_project, both) == [
        "project.yaml, transceivers.sr.rx_sensitivity_dbm: expected rx_min_average_dbm or its "
        "earlier name rx_sensitivity_dbm, not both (got '-9.9')"]


def test_missing_receive_minimum_names_the_current_key(make_project):
    assert _problems(make_project, Y.replace(OLD + ", ", "")) == [
        "project.yaml, transceivers.sr.rx_min_average_dbm: expected a power from -60 to 30 dBm "
        "(required key is missing)"]


def test_overload_check_names_the_key_as_written(make_project):
    text = Y.replace(OLD, "rx_min_average_dbm: -9.9").replace("rx_overload_dbm: -1.0",
                                                               "rx_overload_dbm: -12")
    assert _problems(make_project, text) == [
        "project.yaml, transceivers.sr.rx_overload_dbm: expected more than rx_min_average_dbm "
        "(-9.9 dBm) (got '-12')"]
