"""Kill and resume: a SIGKILLed 2-worker run resumes without redoing verified frames, leaking nothing.

Checked against the run itself: the reference is an uninterrupted run of the same
study (outputs must be byte-identical), "verified" is what the manifest lists with a
matching SHA-256 at the moment of the kill, and leaks are looked for where they were
found before (the system temporary folder, named semaphores in /dev/shm).
"""

import os
import signal
import subprocess
import sys
import tempfile
import time

from renderer.study import outputs, run_study
from studyhelp import GRID_STUDY, tree_digest, write

REPO = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

STUDY = GRID_STUDY.replace("step_deg = 30.0", "step_deg = 45.0").replace(
    "{output_extra}", 'preview = "gif"\npreview_width = 32')
N_FRAMES = 6 * 8


def _shm_mapped(pid):
    """Named POSIX semaphores (/dev/shm/sem.*) mapped by ``pid`` and its children.

    /dev/shm is shared with every other program on the machine, so a before/after
    listing cannot tell whose a semaphore is; the memory maps of the run's own
    processes can (a named semaphore is an mmap of its /dev/shm file; one already
    unlinked is shown "(deleted)" and cannot be left behind).
    """
    pids = [pid]
    try:
        with open(f"/proc/{pid}/task/{pid}/children") as fh:
            pids += [int(x) for x in fh.read().split()]
    except OSError:
        pass
    found = set()
    for p in pids:
        try:
            with open(f"/proc/{p}/maps") as fh:
                # "(deleted)": unlinked at once (anonymous), nothing can outlive the process.
                found |= {w for ln in fh if "(deleted)" not in ln
                          for w in ln.split() if w.startswith("/dev/shm/sem.")}
        except OSError:
            pass
    return found


def _temps():
    # What a run may leave there: the pool's resource file, multiprocessing's folders.
    # (The system folder is shared with other programs, so only these are compared.)
    return {f for f in os.listdir(tempfile.gettempdir())
            if f.startswith(("magretina-resources-", "pymp-"))}


def _verified(out):
    """path -> inode of every frame file the manifest lists and that verifies."""
    got = {}
    for entry in outputs.read_manifest(out).values():
        for rec in entry.get("files", []):
            if rec.get("frame") is not None and outputs.record_ok(out, rec):
                got[rec["path"]] = os.stat(os.path.join(out, rec["path"])).st_ino
    return got


def test_sigkill_two_workers_resume_redoes_no_verified_frame(tmp_path):
    study = write(tmp_path, STUDY)
    ref = str(tmp_path / "ref")
    run_study(study, ref, progress=False)
    tmp0 = _temps()

    out = str(tmp_path / "killed")
    cmd = [sys.executable, "-m", "renderer", "run", study, "--out", out, "--jobs", "2", "--quiet"]
    # A process group of its own, so the kill takes every process of the run at once
    # (the case that used to leak the resource file and the pool's semaphores).
    proc = subprocess.Popen(cmd, cwd=REPO, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True)
    man = os.path.join(out, "manifest.jsonl")
    t0 = time.time()
    n = 0
    sems = None
    while time.time() - t0 < 120 and proc.poll() is None:
        if os.path.isfile(man):
            with open(man) as fh:
                n = sum(1 for _ in fh)
            if n >= 8:
                sems = _shm_mapped(proc.pid)
                break
        time.sleep(0.005)
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()
    assert n >= 8, "the run ended before it could be killed partway"
    time.sleep(0.2)
    before = _verified(out)
    assert 0 < len(before) < N_FRAMES

    s = run_study(study, out, progress=False, jobs=2)
    after = {p: os.stat(os.path.join(out, p)).st_ino for p in before}
    assert after == before, "a verified frame was written again"
    assert s["frames_rendered"] == N_FRAMES - len(before)
    assert tree_digest(out) == tree_digest(ref)
    assert _temps() - tmp0 == set()
    assert sems == set(), f"the run's processes hold named semaphores: {sems}"
    assert not os.path.exists(os.path.join(out, outputs.WORK_DIR))
