"""The test helpers' own rules: a server shared by the run's workers is stopped at the end, and
a traceback in its log fails the run (testkit.serving.stop_shared_servers)."""

import json
import subprocess
import sys

from testkit.serving import SHARED_ENV, stop_shared_servers


def _sleeper(folder, name, log_text):
    proc = subprocess.Popen([sys.executable, "-c", "import time; time.sleep(120)"])
    log = folder / f"{name}.log"
    log.write_text(log_text)
    (folder / f"{name}.json").write_text(
        json.dumps({"url": "http://127.0.0.1:1/", "pid": proc.pid, "log": str(log)})
    )
    return proc


def test_the_shared_servers_stop_and_a_traceback_in_a_log_is_reported(tmp_path, monkeypatch):
    folder = tmp_path / "shared"
    folder.mkdir()
    monkeypatch.setenv(SHARED_ENV, str(folder))
    clean = _sleeper(folder, "clean", "balance-desk: serving 3 case(s)\n")
    broken = _sleeper(folder, "broken", "Traceback (most recent call last):\n  boom\n")
    found = stop_shared_servers()
    assert list(found) == ["broken"] and "boom" in found["broken"]
    for proc in (clean, broken):
        assert proc.wait(timeout=30) is not None  # stopped (terminated), not left running
    assert not folder.exists()


def test_no_shared_folder_is_nothing_to_stop(monkeypatch):
    monkeypatch.delenv(SHARED_ENV, raising=False)
    assert stop_shared_servers() == {}
