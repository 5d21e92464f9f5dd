"""A store on a PostgreSQL server reached with a password: the password is taken from the URL,
from PGPASSWORD or from a password file (libpq's own rules), and no command ever prints it.

Data: scikit-learn's bundled breast-cancer rows (conftest). The test server is the one of
LABELQ_TEST_PG_URL (tests/conftest.py), whose URL must carry a password; .ci/run's server asks
for it on TCP (scram-sha-256). Keeping secrets out of output is common practice; PGPASSWORD and
the password file are libpq's documented sources (PostgreSQL manual, "Environment Variables"
and "The Password File").
"""

from __future__ import annotations

import json
import os
import subprocess
import sys

import pytest
from typer.testing import CliRunner

from labelq.cli.app import app
from tests.conftest import REQUIRE_VARIABLE


@pytest.fixture
def secret_url(pg_database):
    """The new database's URL, which must hold a password (else skipped, or failed in CI)."""
    if not pg_database.password:
        message = "LABELQ_TEST_PG_URL carries no password, so there is none to keep hidden"
        if os.environ.get(REQUIRE_VARIABLE) == "1":
            pytest.fail(message, pytrace=False)
        pytest.skip(message)
    return pg_database


def _text(url) -> str:
    return url.render_as_string(hide_password=False)


def _all_output(result) -> str:
    return result.stdout + result.stderr + ("" if result.exception is None else repr(result.exception))


def test_no_command_prints_the_password(secret_url, cancer_csv, tmp_path):
    """init, import, next, label, show, status, history, export, check, undo and failing
    commands, each with the password in --db: the password is in no output, the URL is shown
    with it hidden."""
    password, db = secret_url.password, _text(secret_url)
    runner = CliRunner()
    runs = []

    def run(*args, code=0):
        result = runner.invoke(app, [*map(str, args), "--db", db])
        runs.append(result)
        assert result.exit_code == code, (args, result.exit_code, result.stderr)
        return result

    created = run("init", "--classes", "malignant,benign", "--json")
    assert json.loads(created.stdout)["db"] == str(secret_url)  # str() hides the password
    assert "***" in json.loads(created.stdout)["db"]
    run("import", cancer_csv, "--id", "key")
    head = json.loads(run("next", "-n", "1", "--json").stdout)["queue"][0]["key"]
    run("label", head, "benign")
    run("label", "c001", "malignant", "--json")
    run("show", head)
    assert json.loads(run("status", "--json").stdout)["db"] == str(secret_url)
    run("status")
    run("history")
    run("export", "labels")
    run("export", "predictions", "-o", tmp_path / "predictions.csv")
    run("check")
    run("undo")
    run("init", "--classes", "a,b", code=2)  # a store exists there
    run("label", "no-such-key", "benign", code=2)
    missing = runner.invoke(app, ["status", "--db", _text(secret_url.set(database="labelq_absent"))])
    runs.append(missing)
    assert missing.exit_code == 2 and "labelq_absent" in missing.stderr
    for result in runs:
        assert password not in _all_output(result)
    # a separate process, as a person runs it: a refused command names the store, password hidden
    child = subprocess.run([sys.executable, "-m", "labelq", "init", "--classes", "a,b", "--db", db],
                           capture_output=True, text=True, timeout=120)
    assert child.returncode == 2
    assert child.stderr == f"labelq: a labelq store already exists in {secret_url}\n"
    assert password not in child.stdout + child.stderr


def test_the_password_can_come_from_pgpassword_or_a_password_file(secret_url, tmp_path):
    """A URL without the password: libpq reads it from PGPASSWORD, else from the file that
    PGPASSFILE names (~/.pgpass by default; lines host:port:database:user:password)."""
    password = secret_url.password
    bare = _text(secret_url.set(password=None))
    runner = CliRunner()
    made = runner.invoke(app, ["init", "--classes", "a,b", "--db", bare],
                         env={"PGPASSWORD": password, "PGPASSFILE": str(tmp_path / "none")})
    assert made.exit_code == 0, made.stderr
    passfile = tmp_path / "pgpass"
    passfile.write_text(f"{secret_url.host}:{secret_url.port or 5432}:{secret_url.database}:"
                        f"{secret_url.username}:{password}\n")
    passfile.chmod(0o600)  # libpq ignores a password file others can read
    status = runner.invoke(app, ["status", "--json", "--db", bare],
                           env={"PGPASSWORD": None, "PGPASSFILE": str(passfile)})
    assert status.exit_code == 0, status.stderr
    assert json.loads(status.stdout)["db"] == str(secret_url.set(password=None))
    for result in (made, status):
        assert password not in _all_output(result)


def test_a_wrong_password_is_one_line_without_either_password(secret_url):
    """A refused login is a user error naming the store (password hidden) and the server's
    reason; neither the wrong password nor the right one is printed."""
    wrong = secret_url.set(password="not-" + secret_url.password)
    result = CliRunner().invoke(app, ["status", "--db", _text(wrong)],
                                env={"PGPASSWORD": None, "PGPASSFILE": os.devnull})
    if result.exit_code == 0:
        pytest.skip("the test server accepts any password (trust authentication), so a wrong "
                    "one cannot be refused")
    assert result.exit_code == 2, result.output
    assert len(result.stderr.strip().splitlines()) == 1
    assert "password authentication failed" in result.stderr
    assert str(wrong) in result.stderr
    assert wrong.password not in result.stderr + result.stdout
    assert secret_url.password not in result.stderr + result.stdout
