"""Where many fits run: the address typed for a Dask scheduler is checked (the forms the
dask.distributed client takes, "tcp://host:port", common practice for its addresses), kept in
the application settings, and used by "Estimate every person" and the Plan page."""

from __future__ import annotations

import pytest

from lagwise.desktop.compute_settings import Compute, ComputeDialog, load_compute
from lagwise.models.errors import SpecError
from lagwise.models.parallel import scheduler_address


@pytest.mark.parametrize("typed, address", [
    ("", None), ("   ", None), ("192.168.1.20:8786", "tcp://192.168.1.20:8786"),
    ("tcp://node-3.lab:8786", "tcp://node-3.lab:8786"), ("tls://h:1", "tls://h:1"),
    ("[::1]:8786", "tcp://[::1]:8786"),
])
def test_scheduler_addresses_are_read_as_the_client_takes_them(typed, address):
    assert scheduler_address(typed) == address


@pytest.mark.parametrize("typed", ["node", "http://h:80", "h:0", "h:70000", "h:87 86",
                                   "tcp://h:8786; rm -rf /"])
def test_other_text_is_refused_in_one_line(typed):
    with pytest.raises(SpecError, match="not a scheduler address") as error:
        scheduler_address(typed)
    assert "\n" not in str(error.value)


def test_the_dialog_keeps_the_setting_and_refuses_a_wrong_address(lagwise_app, qtbot):
    dialog = ComputeDialog()
    qtbot.addWidget(dialog)
    dialog.address.setText("not an address")
    dialog.accept()
    assert dialog.problem.isVisibleTo(dialog) and "not a scheduler address" in dialog.problem.text()
    assert load_compute().scheduler is None            # nothing stored
    dialog.jobs.setValue(1)
    dialog.address.setText("10.0.0.5:8786")
    dialog.accept()
    assert load_compute() == Compute(1, "tcp://10.0.0.5:8786")
    assert "cluster at tcp://10.0.0.5:8786" in load_compute().where()
    dialog.address.setText("")
    dialog.accept()
    assert load_compute() == Compute(1, None)
