"""The README's set-up commands are the ones CI runs, and every documented command exists."""

import re


def test_ci_runs_the_readme_test_command_verbatim(root):
    readme = (root / "README.md").read_text()
    blocks = re.findall(r"```bash\n(.*?)\n```", readme, flags=re.S)
    assert len(blocks) >= 2
    install_and_demo, install_and_test = blocks[0].strip(), blocks[1].strip()
    assert install_and_demo.startswith("python -m pip install . && tracer render examples/")
    assert install_and_test in (root / ".ci" / "run").read_text()
    assert "pytest" in install_and_test


def test_readme_carries_the_medical_caution(root):
    readme = (root / "README.md").read_text()
    assert "not for diagnosis" in readme and "licensed clinical practice" in readme


def test_the_distribution_name_is_not_the_taken_one_and_the_readme_says_how_to_install(root):
    """`tracer` on the public package registry is an unrelated project (checked against the registry's
    page for it); our distribution must be named otherwise, and the README must say so."""
    import tomllib

    project = tomllib.loads((root / "pyproject.toml").read_text())["project"]
    assert project["name"] == "tracer-denoise-lab"
    assert project["scripts"]["tracer"] == "tracer.cli.main:run"
    readme = (root / "README.md").read_text()
    assert "The distribution is called `tracer-denoise-lab`" in readme and "`pip install tracer` installs something else" in readme
