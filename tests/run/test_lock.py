"""The one-writer lock of a results folder: re-entrant in a process, not kept by forked
children, and decided by its holder's record where the file system has no flock."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys

import pytest

from lowdim.run import lock
from lowdim.run.lock import LOCK_NAME, FolderBusy, current_holder, folder_lock

HOLD = (
    "import sys, time\n"
    "from lowdim.run.lock import folder_lock\n"
    "with folder_lock(sys.argv[1], command='holder'):\n"
    "    print('held', flush=True)\n"
    "    time.sleep(60)\n"
)


def test_a_held_folder_is_busy_for_another_process_and_free_once_it_ends(tmp_path):
    holder = subprocess.Popen(
        [sys.executable, "-c", HOLD, str(tmp_path)], stdout=subprocess.PIPE, text=True
    )
    try:
        assert holder.stdout.readline() == "held\n"
        record = current_holder(tmp_path)
        assert (record.pid, record.command, record.alive()) == (holder.pid, "holder", True)
        with pytest.raises(FolderBusy, match=f"pid {holder.pid} on {socket.gethostname()}"):
            with folder_lock(tmp_path):
                pass
    finally:
        holder.kill()
        holder.wait()
        holder.stdout.close()
    # killed without releasing: the lock died with it, its record is stale and taken over
    assert current_holder(tmp_path).alive() is False
    with folder_lock(tmp_path, command="next"):
        assert current_holder(tmp_path).command == "next"
    assert current_holder(tmp_path) is None


def test_the_lock_is_reentrant_and_a_forked_child_does_not_keep_it(tmp_path):
    with folder_lock(tmp_path, command="outer"):
        with folder_lock(tmp_path, command="inner"):
            assert current_holder(tmp_path).command == "outer"
        assert current_holder(tmp_path).command == "outer"
        pid = os.fork()
        if pid == 0:  # the child: its copy of the descriptor is closed, the parent still holds
            os._exit(0 if not lock._held else 1)
        _, status = os.waitpid(pid, 0)
        assert os.waitstatus_to_exitcode(status) == 0
        probe = subprocess.run(
            [sys.executable, "-c", HOLD.replace("time.sleep(60)", "pass"), str(tmp_path)],
            capture_output=True,
            text=True,
        )
        assert probe.returncode != 0 and "is in use by another lowdim run" in probe.stderr
    assert current_holder(tmp_path) is None


def _record(folder, **fields):
    holder = {"pid": os.getpid(), "host": socket.gethostname(), "command": "x", "since": "t"}
    (folder / LOCK_NAME).write_text(json.dumps({**holder, **fields}))


def test_without_flock_the_record_decides(tmp_path, monkeypatch):
    monkeypatch.setattr(lock, "_try_flock", lambda fd: None)
    dead = subprocess.Popen([sys.executable, "-c", "pass"])
    dead.wait()
    _record(tmp_path, pid=dead.pid)  # a pid gone on this host: stale
    with folder_lock(tmp_path, command="mine"):
        assert current_holder(tmp_path).command == "mine"
    _record(tmp_path)  # this very process under another name: alive
    with pytest.raises(FolderBusy, match="in use by another lowdim run"):
        with folder_lock(tmp_path / "."):
            pass
    _record(tmp_path, host="elsewhere.example")  # cannot be checked from here
    with pytest.raises(FolderBusy, match=f"if it has ended, delete '{tmp_path / LOCK_NAME}'"):
        with folder_lock(tmp_path):
            pass
