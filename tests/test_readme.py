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
