"""The node-pair measurement's arguments, refused before the netlist is read or ngspice started."""

from __future__ import annotations

import pytest

from netloop.errors import NetloopError
from netloop.jobs.measure_pair import measure_pair


def test_open_loop_rhp_poles_by_an_unknown_mode_name_is_one_clear_error():
    """A mapping of right-half-plane pole counts by mode names only the modes it knows, and says which it expected."""
    # Reference: measure_pair's docstring (a mapping by mode name, "differential" and "common": netloop.probe.differential.MODES).
    # Raised before the netlist is read or ngspice started, so the path need not exist.
    with pytest.raises(NetloopError) as err:
        measure_pair("no-such-netlist.cir", "outp,outn", open_loop_rhp_poles={"dm": 1, "differential": 0, "cm": 0})
    assert str(err.value) == "open_loop_rhp_poles names unknown modes cm, dm; expected differential, common"

