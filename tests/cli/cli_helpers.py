from typer.testing import CliRunner

from tracer.cli.main import app

runner = CliRunner()


def invoke(*args):
    return runner.invoke(app, [str(a) for a in args], prog_name="tracer")


def assert_user_error(result, *fragments):
    """Exit status 2, one line on stderr starting with 'error:', no traceback."""
    assert result.exit_code == 2, (result.exit_code, result.output, result.exception)
    lines = [line for line in result.stderr.splitlines() if line.strip() and not line.startswith("warning:")]
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("error:")
    assert "Traceback" not in result.output
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])
