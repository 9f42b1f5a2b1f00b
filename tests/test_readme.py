"""The README's two commands for a fresh machine, run verbatim in a fresh copy of the repository.

They are extracted from README.md (the first two ```bash blocks of "On a fresh machine") and run with
the ``python3`` on PATH (any Python >= 3.11), as a new user would. This takes a few minutes (a fresh
venv, an install, the forecast, the whole suite once more), so it runs in CI (``CI`` set) or when
``SYNTHCORONA_README_TEST=run``; the nested test run sets ``SYNTHCORONA_README_TEST=skip`` so it does not
recurse.
"""
import os
import pathlib
import re
import shutil
import subprocess
import sys

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[1]


def readme_commands() -> list[str]:
    """The shell commands of the README's 'On a fresh machine' section, in order."""
    text = (ROOT / "README.md").read_text()
    section = text.split("## On a fresh machine", 1)[1].split("\n## ", 1)[0]
    return [b.strip() for b in re.findall(r"```bash\n(.*?)```", section, flags=re.S)]


def test_readme_has_the_two_commands_and_ci_runs_the_test_command_verbatim():
    cmds = readme_commands()
    assert len(cmds) == 2, cmds
    install_run, install_test = cmds
    assert install_run.startswith("python3 -m venv ") and "synthcorona forecast" in install_run
    assert install_test.startswith("python3 -m venv ") and "pytest" in install_test
    ci = (ROOT / ".ci" / "run").read_text().splitlines()
    assert install_test in ci, "CI must run the README test command verbatim"


def _want_run() -> str | None:
    mode = os.environ.get("SYNTHCORONA_README_TEST", "")
    if mode == "skip":
        return "nested run of the README test command"
    if mode != "run" and not os.environ.get("CI"):
        return "slow (fresh venv and install): runs in CI or with SYNTHCORONA_README_TEST=run"
    return None


def test_readme_commands_work_verbatim_in_a_fresh_copy(tmp_path):
    reason = _want_run()
    if reason:
        pytest.skip(reason)
    python3 = shutil.which("python3")
    assert python3, "no python3 on PATH"
    version = subprocess.run([python3, "-c", "import sys; print(sys.version_info[:2] >= (3, 11))"],
                             capture_output=True, text=True, timeout=60).stdout.strip()
    assert version == "True", "the README promises any python3 >= 3.11"
    files = subprocess.run(["git", "ls-files"], cwd=ROOT, capture_output=True, text=True, timeout=60,
                           check=True).stdout.split()
    copy = tmp_path / "checkout"
    for f in files:
        (copy / f).parent.mkdir(parents=True, exist_ok=True)
        shutil.copy2(ROOT / f, copy / f)
    env = {k: v for k, v in os.environ.items() if not k.startswith(("PYTHON", "VIRTUAL_ENV"))}
    env["SYNTHCORONA_README_TEST"] = "skip"
    env.pop("PYENV_VERSION", None)
    for cmd in readme_commands():
        out = subprocess.run(cmd, shell=True, cwd=copy, env=env, capture_output=True, text=True, timeout=2400,
                             executable="/bin/bash")
        assert out.returncode == 0, f"{cmd}\n{out.stdout[-3000:]}\n{out.stderr[-3000:]}"
    assert (copy / "forecast_out" / "forecast.nc").is_file()
    assert re.search(r"\d+ passed", out.stdout), out.stdout[-2000:]
    print(sys.version, file=sys.stderr)
