"""``tracer dataset`` and ``dataset-sheet`` from the command line; scheduler-address validation."""

import pytest

from tracer.dataset.cluster import check_scheduler_address
from tracer.errors import UserError
from tests.dataset.plans import write_plan

from .cli_helpers import assert_user_error, invoke


def test_dataset_command_builds_summarises_and_draws_a_sheet(tmp_path):
    plan = write_plan(tmp_path / "plan", views=1, width=16, height=16, reference_spp=8)
    result = invoke("dataset", plan, "--out", tmp_path / "ds")
    assert result.exit_code == 0, result.output
    assert "2 items" in result.stdout and "per split" in result.stdout and "worst reference" in result.stdout
    again = invoke("dataset", plan, "--out", tmp_path / "ds", "--resume")
    assert again.exit_code == 0 and "(2 were already done)" in again.stdout
    sheet = invoke("dataset-sheet", tmp_path / "ds", "--items", 2)
    assert sheet.exit_code == 0, sheet.output
    assert (tmp_path / "ds" / "sheet.png").stat().st_size > 10_000


def test_dataset_errors_are_one_line(tmp_path):
    plan = write_plan(tmp_path / "plan", splits="train = 0.3")
    assert_user_error(invoke("dataset", plan, "--out", tmp_path / "ds"), "fractions must add up to 1")
    good = write_plan(tmp_path / "good", views=1, width=8, height=8)
    assert_user_error(invoke("dataset", good, "--out", tmp_path / "x", "--workers", 2, "--scheduler", "tcp://a:1"),
                      "--workers and --scheduler")
    assert_user_error(invoke("dataset", good, "--out", tmp_path / "x", "--scheduler", "http://evil;rm"),
                      "not a scheduler address")
    assert_user_error(invoke("dataset-sheet", tmp_path / "empty"), "no finished items")


@pytest.mark.parametrize("address", ["tcp://127.0.0.1:8786", "tcp://node-3.cluster:9000", "tls://[::1]:8786"])
def test_scheduler_addresses_that_are_accepted(address):
    assert check_scheduler_address(address) == address


@pytest.mark.parametrize("address", ["127.0.0.1:8786", "tcp://host", "tcp://host:99999", "tcp://a b:1", "", "ssh://h:1"])
def test_scheduler_addresses_that_are_refused(address):
    with pytest.raises(UserError):
        check_scheduler_address(address)


def test_an_unreachable_scheduler_is_one_line(tmp_path):
    plan = write_plan(tmp_path / "plan", views=1, width=8, height=8)
    result = invoke("dataset", plan, "--out", tmp_path / "ds", "--scheduler", "tcp://127.0.0.1:9")
    assert_user_error(result, "cannot reach tcp://127.0.0.1:9")
